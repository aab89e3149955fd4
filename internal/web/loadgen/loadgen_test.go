package loadgen

import (
	"context"
	"fmt"
	"math/rand/v2"
	"net"
	"net/http"
	"net/http/httptest"
	"sync"
	"sync/atomic"
	"testing"
	"time"
)

// counter is a real net/http server on loopback that counts what it
// answers, by status, and the connections it accepts.
type counter struct {
	mu     sync.Mutex
	status map[int]int64
	drops  int64
	conns  atomic.Int64
}

func (c *counter) count(code int) {
	c.mu.Lock()
	c.status[code]++
	c.mu.Unlock()
}

func (c *counter) ServeHTTP(w http.ResponseWriter, r *http.Request) {
	switch r.URL.Path {
	case "/ok":
		c.count(200)
		fmt.Fprint(w, "a mark")
	case "/slow":
		time.Sleep(20 * time.Millisecond)
		c.count(200)
		fmt.Fprint(w, "a slow mark")
	case "/not-modified":
		c.count(304)
		w.WriteHeader(http.StatusNotModified)
	case "/drop":
		// A response cut short: the headers promise 100 bytes, three come
		// and the connection closes.
		c.mu.Lock()
		c.drops++
		c.mu.Unlock()
		conn, buf, err := http.NewResponseController(w).Hijack()
		if err != nil {
			panic(err)
		}
		buf.WriteString("HTTP/1.1 200 OK\r\nContent-Length: 100\r\n\r\nabc")
		buf.Flush()
		conn.Close()
	default:
		c.count(404)
		http.NotFound(w, r)
	}
}

func serve(t *testing.T) (*counter, *httptest.Server) {
	c := &counter{status: map[int]int64{}}
	srv := httptest.NewUnstartedServer(c)
	srv.Config.ConnState = func(_ net.Conn, s http.ConnState) {
		if s == http.StateNew {
			c.conns.Add(1)
		}
	}
	srv.Start()
	t.Cleanup(srv.Close)
	return c, srv
}

// Every request sent is counted once, by the status the server gave it,
// and the clients keep their connections alive: the server's counts and
// the run's agree exactly.
func TestRunCountsEveryRequest(t *testing.T) {
	c, srv := serve(t)
	paths := []string{"/ok", "/slow", "/not-modified", "/missing"}
	res, err := Run(context.Background(), Options{BaseURL: srv.URL, Clients: 8, Duration: 300 * time.Millisecond, Seed: 1,
		Next: func(r *rand.Rand) Request { return Request{Path: paths[r.IntN(len(paths))]} }})
	if err != nil {
		t.Fatal(err)
	}
	t.Log(res.Summary())
	if res.Sent == 0 || res.Lost() != 0 || res.Failed() != 0 {
		t.Errorf("sent %d, lost %d, failed %d (%s)", res.Sent, res.Lost(), res.Failed(), res.ErrorText())
	}
	c.mu.Lock()
	defer c.mu.Unlock()
	for _, code := range []int{200, 304, 404} {
		if res.Status[code] != c.status[code] || c.status[code] == 0 {
			t.Errorf("status %d: the run counted %d, the server answered %d", code, res.Status[code], c.status[code])
		}
	}
	if int64(len(res.Latencies)) != res.Answered() {
		t.Errorf("%d latencies for %d responses", len(res.Latencies), res.Answered())
	}
	for i := 1; i < len(res.Latencies); i++ {
		if res.Latencies[i] < res.Latencies[i-1] {
			t.Fatalf("latencies not sorted at %d", i)
		}
	}
	if res.Percentile(100) < 20*time.Millisecond {
		t.Errorf("the slowest response took %s, less than the server's 20 ms sleep", res.Percentile(100))
	}
	if res.Connections != 8 || c.conns.Load() != 8 {
		t.Errorf("connections: the run opened %d, the server accepted %d; want one a client, 8", res.Connections, c.conns.Load())
	}
	if res.PerSecond() <= 0 {
		t.Errorf("rate %v", res.PerSecond())
	}
}

// A response cut short is counted as an error, once, and not as an
// answer: none lost.
func TestRunCountsResponsesCutShort(t *testing.T) {
	c, srv := serve(t)
	paths := []string{"/ok", "/drop"}
	res, err := Run(context.Background(), Options{BaseURL: srv.URL, Clients: 4, Duration: 200 * time.Millisecond, Seed: 2,
		Next: func(r *rand.Rand) Request { return Request{Path: paths[r.IntN(len(paths))]} }})
	if err != nil {
		t.Fatal(err)
	}
	t.Log(res.Summary())
	c.mu.Lock()
	defer c.mu.Unlock()
	if res.Lost() != 0 {
		t.Errorf("lost %d", res.Lost())
	}
	if c.drops == 0 || res.Errors["body: connection closed"] != c.drops || res.Failed() != c.drops {
		t.Errorf("the server cut %d responses short; the run counted %v", c.drops, res.Errors)
	}
	if res.Status[200] != c.status[200] {
		t.Errorf("200: the run counted %d, the server answered %d", res.Status[200], c.status[200])
	}
	if res.Sent != c.drops+c.status[200] {
		t.Errorf("sent %d, the server saw %d", res.Sent, c.drops+c.status[200])
	}
}

// A site that does not answer at all: every request is an error, counted.
func TestRunCountsRefusedConnections(t *testing.T) {
	ln, err := net.Listen("tcp", "127.0.0.1:0")
	if err != nil {
		t.Fatal(err)
	}
	addr := ln.Addr().String()
	ln.Close()
	res, err := Run(context.Background(), Options{BaseURL: "http://" + addr, Clients: 2, Duration: 50 * time.Millisecond,
		Next: func(*rand.Rand) Request { return Request{Path: "/ok"} }})
	if err != nil {
		t.Fatal(err)
	}
	if res.Sent == 0 || res.Errors["connection refused"] != res.Sent || res.Lost() != 0 {
		t.Errorf("%s", res.Summary())
	}
}

// The nearest-rank percentile (common practice: the value of rank
// ⌈p/100 · n⌉ of the sorted list), worked by hand: of 1..100 ms the 50th
// is 50 ms and the 99th 99 ms; of 1..10 ms the 99th is rank ⌈9.9⌉ = 10
// and the 50th rank 5.
func TestPercentileNearestRank(t *testing.T) {
	list := func(n int) []time.Duration {
		var l []time.Duration
		for i := 1; i <= n; i++ {
			l = append(l, time.Duration(i)*time.Millisecond)
		}
		return l
	}
	for _, c := range []struct {
		n    int
		p    float64
		want time.Duration
	}{
		{100, 50, 50 * time.Millisecond}, {100, 99, 99 * time.Millisecond}, {100, 100, 100 * time.Millisecond},
		{10, 99, 10 * time.Millisecond}, {10, 50, 5 * time.Millisecond}, {10, 1, 1 * time.Millisecond}, {0, 50, 0},
	} {
		if got := (Result{Latencies: list(c.n)}).Percentile(c.p); got != c.want {
			t.Errorf("p%v of 1..%d ms: %s, want %s", c.p, c.n, got, c.want)
		}
	}
}

func TestRunRefusesBadOptions(t *testing.T) {
	next := func(*rand.Rand) Request { return Request{Path: "/"} }
	for _, o := range []Options{
		{BaseURL: "http://127.0.0.1:1", Clients: 0, Duration: time.Second, Next: next},
		{BaseURL: "http://127.0.0.1:1", Clients: 1, Duration: 0, Next: next},
		{BaseURL: "127.0.0.1:1", Clients: 1, Duration: time.Second, Next: next},
		{BaseURL: "http://127.0.0.1:1", Clients: 1, Duration: time.Second},
	} {
		if _, err := Run(context.Background(), o); err == nil {
			t.Errorf("%+v: no error", o)
		}
	}
}
