// Package loadgen is a bounded HTTP load generator for cairn serve: a
// fixed number of clients, each sending one request after another over its
// own keep-alive HTTP/1.1 connection for a fixed time, and a count of every
// request sent, by status or by error, with the exact latencies.
//
// It is used by TestLoad (CAIRN_LOAD_URL) against a running site and by
// its own tests against a real net/http server; docs/performance.md
// gives its figures.
package loadgen

import (
	"context"
	"crypto/tls"
	"errors"
	"fmt"
	"io"
	"math/rand/v2"
	"net"
	"net/http"
	"os"
	"slices"
	"strings"
	"sync"
	"sync/atomic"
	"syscall"
	"time"
)

// Request is one request a client sends: a path with its query, and the
// headers to add (If-None-Match for the 304 runs).
type Request struct {
	Path   string
	Header http.Header
}

// Options are the bounds of one run.
type Options struct {
	// BaseURL is the site, e.g. http://127.0.0.1:8080.
	BaseURL string
	// Clients is the number of concurrent clients, each with one
	// connection kept alive.
	Clients int
	// Duration is how long each client sends requests; a request under
	// way at the end is waited for and counted.
	Duration time.Duration
	// Next gives a client's next request; each client has its own random
	// source (seeded from Seed and the client's number), so Next need not
	// be safe for concurrent use beyond reading shared data.
	Next func(r *rand.Rand) Request
	// Seed makes a run's requests repeatable.
	Seed uint64
	// Timeout bounds each request (0: 60 s).
	Timeout time.Duration
}

// Result is what a run saw. Every request sent is counted once: by its
// status when a response was read whole, by its error otherwise.
type Result struct {
	Clients int
	// Elapsed is the wall time from the first request to the last
	// response.
	Elapsed time.Duration
	// Sent is the number of requests sent.
	Sent int64
	// Status counts the responses read whole, by status code.
	Status map[int]int64
	// Errors counts the requests that got no whole response, by the kind
	// of error (ErrorKind).
	Errors map[string]int64
	// Latencies of the responses read whole, from sending to the last
	// byte of the body, sorted.
	Latencies []time.Duration
	// Connections is the number of TCP connections opened: Clients when
	// every connection was kept alive.
	Connections int64
	// Bytes is the sum of the bodies read.
	Bytes int64
}

// Answered is the number of responses read whole.
func (r Result) Answered() int64 {
	var n int64
	for _, c := range r.Status {
		n += c
	}
	return n
}

// Failed is the number of requests that got no whole response.
func (r Result) Failed() int64 {
	var n int64
	for _, c := range r.Errors {
		n += c
	}
	return n
}

// Lost is the number of requests sent that were neither answered nor
// failed: zero, or the generator has a bug.
func (r Result) Lost() int64 { return r.Sent - r.Answered() - r.Failed() }

// PerSecond is the rate of responses read whole.
func (r Result) PerSecond() float64 {
	if r.Elapsed <= 0 {
		return 0
	}
	return float64(r.Answered()) / r.Elapsed.Seconds()
}

// Percentile is the p-th percentile (0 < p ≤ 100) of the latencies by the
// nearest-rank method: the smallest latency such that at least p % of all
// are no greater: the value of rank ⌈p/100 · n⌉ in the sorted list
// (common practice: the nearest-rank definition of a percentile). Zero
// with no latencies.
func (r Result) Percentile(p float64) time.Duration {
	n := len(r.Latencies)
	if n == 0 || p <= 0 {
		return 0
	}
	rank := int(ceil(p / 100 * float64(n)))
	if rank < 1 {
		rank = 1
	}
	if rank > n {
		rank = n
	}
	return r.Latencies[rank-1]
}

// ceil is math.Ceil with a tolerance for p/100*n computed a hair above a
// whole number (99/100*100 is 99.00000000000001).
func ceil(x float64) float64 {
	f := float64(int64(x))
	if x-f > 1e-9 {
		return f + 1
	}
	return f
}

// StatusText lists the status counts, "200: 1234, 304: 5".
func (r Result) StatusText() string {
	return countText(r.Status, func(k int) string { return fmt.Sprint(k) })
}

// ErrorText lists the error counts, or "none".
func (r Result) ErrorText() string {
	if len(r.Errors) == 0 {
		return "none"
	}
	return countText(r.Errors, func(k string) string { return k })
}

func countText[K int | string](m map[K]int64, name func(K) string) string {
	keys := make([]K, 0, len(m))
	for k := range m {
		keys = append(keys, k)
	}
	slices.Sort(keys)
	parts := make([]string, len(keys))
	for i, k := range keys {
		parts[i] = fmt.Sprintf("%s: %d", name(k), m[k])
	}
	return strings.Join(parts, ", ")
}

// Summary is one line of the run's figures.
func (r Result) Summary() string {
	return fmt.Sprintf("%d clients, %.1f s: %d sent, %.0f req/s, p50 %s, p99 %s, max %s; status %s; errors %s; lost %d; %d connections",
		r.Clients, r.Elapsed.Seconds(), r.Sent, r.PerSecond(), ms(r.Percentile(50)), ms(r.Percentile(99)), ms(r.Percentile(100)),
		r.StatusText(), r.ErrorText(), r.Lost(), r.Connections)
}

func ms(d time.Duration) string { return fmt.Sprintf("%.1f ms", float64(d.Microseconds())/1000) }

// ErrorKind names the kind of a request's error, for counting: a timeout,
// a refused or reset connection, the connection closed before the
// response, or the error's text.
func ErrorKind(err error) string {
	var ne net.Error
	switch {
	case errors.Is(err, context.DeadlineExceeded), errors.As(err, &ne) && ne.Timeout(), errors.Is(err, os.ErrDeadlineExceeded):
		return "timeout"
	case errors.Is(err, syscall.ECONNREFUSED):
		return "connection refused"
	case errors.Is(err, syscall.ECONNRESET):
		return "connection reset"
	case errors.Is(err, syscall.EADDRNOTAVAIL):
		return "no local port"
	case errors.Is(err, io.EOF), errors.Is(err, io.ErrUnexpectedEOF):
		return "connection closed"
	}
	s := err.Error()
	if len(s) > 120 {
		s = s[:120]
	}
	return s
}

// client's tally, merged at the end.
type tally struct {
	sent      int64
	status    map[int]int64
	errors    map[string]int64
	latencies []time.Duration
	bytes     int64
}

// Run sends requests from opts.Clients clients for opts.Duration and
// counts them. It returns an error only for options it cannot run; the
// requests' own errors are in the Result.
func Run(ctx context.Context, opts Options) (Result, error) {
	if opts.Clients < 1 {
		return Result{}, fmt.Errorf("load: %d clients: give at least one", opts.Clients)
	}
	if opts.Duration <= 0 {
		return Result{}, fmt.Errorf("load: duration %s: give more than zero", opts.Duration)
	}
	if opts.Next == nil {
		return Result{}, errors.New("load: no requests (Next is nil)")
	}
	base := strings.TrimRight(opts.BaseURL, "/")
	if !strings.HasPrefix(base, "http://") && !strings.HasPrefix(base, "https://") {
		return Result{}, fmt.Errorf("load: base URL %q: give http://host:port", opts.BaseURL)
	}
	timeout := opts.Timeout
	if timeout <= 0 {
		timeout = 60 * time.Second
	}
	var conns atomic.Int64
	dialer := &net.Dialer{Timeout: 10 * time.Second, KeepAlive: 30 * time.Second}
	tr := &http.Transport{
		DialContext: func(ctx context.Context, network, addr string) (net.Conn, error) {
			c, err := dialer.DialContext(ctx, network, addr)
			if err == nil {
				conns.Add(1)
			}
			return c, err
		},
		// HTTP/1.1, one connection a client, kept alive between its
		// requests.
		ForceAttemptHTTP2:   false,
		TLSNextProto:        map[string]func(string, *tls.Conn) http.RoundTripper{},
		MaxIdleConns:        opts.Clients,
		MaxIdleConnsPerHost: opts.Clients,
		MaxConnsPerHost:     opts.Clients,
		IdleConnTimeout:     90 * time.Second,
		DisableCompression:  true,
	}
	defer tr.CloseIdleConnections()
	hc := &http.Client{Transport: tr, Timeout: timeout,
		CheckRedirect: func(*http.Request, []*http.Request) error { return http.ErrUseLastResponse }}

	tallies := make([]tally, opts.Clients)
	start := time.Now()
	deadline := start.Add(opts.Duration)
	var wg sync.WaitGroup
	for i := range tallies {
		wg.Add(1)
		go func(t *tally, rng *rand.Rand) {
			defer wg.Done()
			t.status, t.errors = map[int]int64{}, map[string]int64{}
			buf := make([]byte, 32<<10)
			for ctx.Err() == nil && time.Now().Before(deadline) {
				rq := opts.Next(rng)
				req, err := http.NewRequestWithContext(ctx, http.MethodGet, base+rq.Path, nil)
				if err != nil {
					// Counted as sent and failed: a bad path from Next is a
					// request the run could not make.
					t.sent++
					t.errors["bad request: "+err.Error()]++
					continue
				}
				for k, vs := range rq.Header {
					req.Header[k] = vs
				}
				t0 := time.Now()
				t.sent++
				resp, err := hc.Do(req)
				if err != nil {
					t.errors[ErrorKind(err)]++
					continue
				}
				n, err := io.CopyBuffer(io.Discard, resp.Body, buf)
				resp.Body.Close()
				t.bytes += n
				if err != nil {
					t.errors["body: "+ErrorKind(err)]++
					continue
				}
				t.latencies = append(t.latencies, time.Since(t0))
				t.status[resp.StatusCode]++
			}
		}(&tallies[i], rand.New(rand.NewPCG(opts.Seed, uint64(i))))
	}
	wg.Wait()
	res := Result{Clients: opts.Clients, Elapsed: time.Since(start), Status: map[int]int64{}, Errors: map[string]int64{}, Connections: conns.Load()}
	for _, t := range tallies {
		res.Sent += t.sent
		res.Bytes += t.bytes
		for k, v := range t.status {
			res.Status[k] += v
		}
		for k, v := range t.errors {
			res.Errors[k] += v
		}
		res.Latencies = append(res.Latencies, t.latencies...)
	}
	slices.Sort(res.Latencies)
	return res, nil
}
