// Package web is cairn's public, read-only site over the register (cairn
// serve): HTML pages to look marks up (search by name or by a point and
// radius, a mark's datasheet with its history), and an OGC API – Features
// (Part 1: Core) service of the marks, in GeoJSON (RFC 7946) and HTML.
//
// The handlers call the register's read use cases (internal/register) and
// nothing else: no SQL here. Every response carries the security headers,
// an ETag of the register's state (an unchanged register answers 304) and
// the cautions; the pages work without JavaScript and hold no script at
// all.
package web

import (
	"context"
	"crypto/sha256"
	"encoding/hex"
	"errors"
	"fmt"
	"log/slog"
	"net"
	"net/http"
	"strconv"
	"strings"
	"time"

	"cairn/internal/register"
)

// Limits of a request.
const (
	// MaxQueryBytes is the longest query string answered (414 beyond).
	MaxQueryBytes = 2048
	// DefaultLimit and MaxLimit bound the marks of one page of items
	// (OGC API – Features /req/core/fc-limit-definition: default and
	// maximum are the server's).
	DefaultLimit = 10
	MaxLimit     = register.MaxFeaturesPage
	// RequestTimeout bounds the work of one request; the database's
	// statement timeout (cairn serve sets it) bounds each statement.
	RequestTimeout = 20 * time.Second
)

// Statement is the audit statement the site shows in its footer: what
// `cairn audit statement` wrote, read by cairn serve --statement.
type Statement struct {
	Seq          int64
	Head         string
	LatestCommit time.Time
	MadeAt       time.Time
	// SHA256 is the digest of the statement's file, in hex.
	SHA256 string
	Signed bool
}

// Config is what the site serves.
type Config struct {
	Register *register.Register
	// Statement is the audit statement to show; nil: "no signed
	// statement".
	Statement *Statement
	// Tiles is the map's tile layer, a URL template with {z}, {x} and {y}
	// (ParseTiles); "" draws none, so that the map needs no other server.
	Tiles   string
	Version string
	Logger  *slog.Logger
}

// Server answers the site's requests.
type Server struct {
	cfg   Config
	log   *slog.Logger
	mux   *http.ServeMux
	build string // what, beside the register's state, shapes a response
	tiles *TileSource
}

// New returns the site over cfg.
func New(cfg Config) *Server {
	s := &Server{cfg: cfg, log: cfg.Logger, mux: http.NewServeMux()}
	if s.log == nil {
		s.log = slog.New(slog.DiscardHandler)
	}
	b := sha256.New()
	fmt.Fprintf(b, "cairn %s\ntiles %s\n", cfg.Version, cfg.Tiles)
	if st := cfg.Statement; st != nil {
		fmt.Fprintf(b, "statement %s\n", st.SHA256)
	}
	s.build = hex.EncodeToString(b.Sum(nil))[:12]
	if t, err := ParseTiles(cfg.Tiles); err != nil {
		s.log.Error("no tile layer on the map", "err", err.Error())
	} else {
		s.tiles = t
	}
	s.routes()
	return s
}

// Handler is the site with its middleware: the access log, the security
// headers, the request limits and the ETag.
func (s *Server) Handler() http.Handler {
	return s.accessLog(s.secure(s.limits(s.conditional(s.mux))))
}

// Run serves on ln until ctx ends, then shuts down gracefully: the
// requests under way are given up to grace to finish.
func (s *Server) Run(ctx context.Context, ln net.Listener, grace time.Duration) error {
	srv := &http.Server{
		Handler:           s.Handler(),
		ReadHeaderTimeout: 5 * time.Second,
		ReadTimeout:       10 * time.Second,
		WriteTimeout:      RequestTimeout + 10*time.Second,
		IdleTimeout:       60 * time.Second,
		MaxHeaderBytes:    16 << 10,
		ErrorLog:          slog.NewLogLogger(s.log.Handler(), slog.LevelWarn),
	}
	errc := make(chan error, 1)
	go func() { errc <- srv.Serve(ln) }()
	select {
	case err := <-errc:
		return err
	case <-ctx.Done():
	}
	s.log.Info("shutting down", "grace", grace.String())
	sctx, cancel := context.WithTimeout(context.WithoutCancel(ctx), grace)
	defer cancel()
	if err := srv.Shutdown(sctx); err != nil {
		return fmt.Errorf("shut down: %w", err)
	}
	if err := <-errc; !errors.Is(err, http.ErrServerClosed) {
		return err
	}
	return nil
}

// ContentSecurityPolicy allows the site's own stylesheets and images (and
// photographs as data: URLs), no script from anywhere, no frame around
// it, forms to itself only. The map page alone runs script, the site's
// own files only (mapCSP).
const ContentSecurityPolicy = "default-src 'none'; script-src 'none'; style-src 'self'; img-src 'self' data:; " +
	"form-action 'self'; frame-ancestors 'none'; base-uri 'none'"

// secure sets the security headers of every response.
func (s *Server) secure(next http.Handler) http.Handler {
	return http.HandlerFunc(func(w http.ResponseWriter, r *http.Request) {
		h := w.Header()
		// The map page's policy is set here, not by its handler, so that a
		// 304 carries it too: a browser takes a 304's headers into the
		// page it keeps (RFC 9111 §4.3.4).
		if r.URL.Path == "/map" {
			h.Set("Content-Security-Policy", s.mapCSP())
		} else {
			h.Set("Content-Security-Policy", ContentSecurityPolicy)
		}
		h.Set("X-Content-Type-Options", "nosniff")
		h.Set("X-Frame-Options", "DENY")
		h.Set("Referrer-Policy", "no-referrer")
		h.Set("Cross-Origin-Opener-Policy", "same-origin")
		// The register's data is public: GIS clients in a browser may read
		// it from another origin (no credentials are ever involved).
		h.Set("Access-Control-Allow-Origin", "*")
		next.ServeHTTP(w, r)
	})
}

// limits refuses what the site does not answer: a method other than GET
// or HEAD, a body, a query longer than MaxQueryBytes; and bounds the time
// of the rest.
func (s *Server) limits(next http.Handler) http.Handler {
	return http.HandlerFunc(func(w http.ResponseWriter, r *http.Request) {
		if r.Method != http.MethodGet && r.Method != http.MethodHead {
			w.Header().Set("Allow", "GET, HEAD")
			s.fail(w, r, http.StatusMethodNotAllowed, "the site only reads: GET or HEAD")
			return
		}
		if len(r.URL.RawQuery) > MaxQueryBytes {
			s.fail(w, r, http.StatusRequestURITooLong, fmt.Sprintf("the query is %d bytes, more than the %d answered", len(r.URL.RawQuery), MaxQueryBytes))
			return
		}
		if r.ContentLength > 0 {
			s.fail(w, r, http.StatusBadRequest, "a request to the site has no body")
			return
		}
		r.Body = http.MaxBytesReader(w, r.Body, 0)
		ctx, cancel := context.WithTimeout(r.Context(), RequestTimeout)
		defer cancel()
		next.ServeHTTP(w, r.WithContext(ctx))
	})
}

// etag is the entity tag of the response to r in register state st: the
// state's head, what shapes the site (version, statement, tiles) and the
// representation chosen, so that a response changes its tag exactly when
// its bytes may change.
func (s *Server) etag(st register.RegisterState, r *http.Request) string {
	head := st.Head
	if len(head) > 16 {
		head = head[:16]
	}
	return `"` + strconv.FormatInt(st.Seq, 10) + "-" + head + "-" + s.build + "-" + string(negotiate(r, pathFormats(r.URL.Path))) + `"`
}

// conditional answers 304 Not Modified to a request whose If-None-Match
// names the tag of the register's state now, before any work; other
// responses get that tag unless their handler sets the tag of the
// snapshot it read.
func (s *Server) conditional(next http.Handler) http.Handler {
	return http.HandlerFunc(func(w http.ResponseWriter, r *http.Request) {
		st, err := s.cfg.Register.State(r.Context())
		if err != nil {
			s.serverError(w, r, err)
			return
		}
		tag := s.etag(st, r)
		w.Header().Set("ETag", tag)
		w.Header().Set("Vary", "Accept")
		w.Header().Set("Cache-Control", "no-cache")
		if inm := r.Header.Get("If-None-Match"); inm != "" && matchesETag(inm, tag) {
			w.WriteHeader(http.StatusNotModified)
			return
		}
		next.ServeHTTP(w, r)
	})
}

// matchesETag says whether an If-None-Match header names tag (RFC 9110
// §13.1.2: a list of tags, or "*"; compared weakly).
func matchesETag(header, tag string) bool {
	for _, t := range strings.Split(header, ",") {
		t = strings.TrimPrefix(strings.TrimSpace(t), "W/")
		if t == "*" || t == tag {
			return true
		}
	}
	return false
}

// statusWriter keeps the status and size of a response for the log.
type statusWriter struct {
	http.ResponseWriter
	status int
	bytes  int64
}

func (w *statusWriter) WriteHeader(code int) {
	if w.status == 0 {
		w.status = code
	}
	w.ResponseWriter.WriteHeader(code)
}

func (w *statusWriter) Write(b []byte) (int, error) {
	if w.status == 0 {
		w.status = http.StatusOK
	}
	n, err := w.ResponseWriter.Write(b)
	w.bytes += int64(n)
	return n, err
}

// accessLog writes one structured line per request.
func (s *Server) accessLog(next http.Handler) http.Handler {
	return http.HandlerFunc(func(w http.ResponseWriter, r *http.Request) {
		start := time.Now()
		sw := &statusWriter{ResponseWriter: w}
		next.ServeHTTP(sw, r)
		if sw.status == 0 {
			sw.status = http.StatusOK
		}
		s.log.LogAttrs(r.Context(), slog.LevelInfo, "request",
			slog.String("method", r.Method), slog.String("path", r.URL.Path), slog.String("query", r.URL.RawQuery),
			slog.Int("status", sw.status), slog.Int64("bytes", sw.bytes),
			slog.Float64("duration_ms", float64(time.Since(start).Microseconds())/1000),
			slog.String("remote", r.RemoteAddr))
	})
}
