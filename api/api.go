// Package api is the HTTP service of a project: people fetch items to label
// and send their answers; the team reads the project's state and runs rounds.
// It is the only package that imports github.com/labstack/echo/v4.
//
// Everything is JSON under /api/v1 (described by the OpenAPI 3 document at
// /api/v1/openapi.json); the embedded pages of package web are served at /,
// /signin, /label and /board; Prometheus metrics at /metrics (for admins,
// by default; Config.Metrics).
//
// Rules the service keeps:
//
//   - An item is handed out as a lease that expires (Config.LeaseTime). An
//     item is never handed out beyond its target number of labels
//     (Config.Redundancy) counting its labels and its live leases, never to
//     a person who has labelled it, and returns to the pool when its lease
//     expires.
//   - A label is acknowledged (2xx) only after the transaction that wrote it
//     has committed; concurrent labels share transactions (group commit). A
//     label carries an idempotency key: sending it again returns the first
//     answer and writes nothing. A label must come under a live lease of its
//     sender; leases are kept in memory, and a stored copy, written in the
//     background, brings them back after a restart (a lease handed out in the
//     moment before a crash may be lost: its answer is refused, never
//     half-stored, and the person gets another item).
//   - People sign in with a token (`loop people add`), kept only as an
//     argon2id hash. Annotators see items, the codebook and their own labels,
//     never gold answers (outside the practice), the consensus, machine
//     labels or other people's labels. The team's routes need an admin
//     token.
//   - Pages use a cookie session with a CSRF token; API clients send the
//     token as a bearer token. JSON bodies must say so (Content-Type), are
//     size-limited, each person is rate-limited, and requests time out.
//     Failed sign-ins slow down the token id or the address that sent them,
//     never a token that verifies (see auth). A revoked token is refused
//     from the next request on.
//   - Images are served by item id only; the file path comes from the store.
//
// Size: about 4,000 lines, because it is every HTTP route of the service
// (labelling, board, people, imports, rounds, exports, metrics) with their
// authentication, rate limits, the work pool and the practice gate; the
// work is done by the packages below, this package only serves it.
package api

import (
	"context"
	"errors"
	"fmt"
	"net"
	"net/http"
	"os"
	"runtime/debug"
	"sync"
	"time"

	"github.com/labstack/echo/v4"

	"handoff/store"
)

// Config sets how the service runs. Zero values mean the defaults.
type Config struct {
	// LeaseTime is how long a person holds an item (default 10 minutes).
	LeaseTime time.Duration
	// Redundancy is the number of labels wanted per item (default 3).
	Redundancy int
	// Practice and Check are the numbers of gold items shown as practice
	// (the expert's answer is shown after each) and then as the check
	// (answers never shown) before an annotator gets real work. Negative
	// means none; 0 means the defaults (3 and 5). Projects without gold skip
	// both. See practice.go for how the check resists guessing.
	Practice, Check int
	// PassMark is the share of check answers that must match the gold
	// answer (default 0.8).
	PassMark float64
	// CheckAttempts is how many check attempts a person has before the team
	// must grant another (default 3; negative: no limit).
	CheckAttempts int
	// ChangeWindow is how long after an answer a person may still change it
	// (their latest answer only; default 10 minutes).
	ChangeWindow time.Duration
	// Metrics says who may read the Prometheus metrics at /metrics:
	// "admin" (the default: an admin's bearer token), "open" (anyone who
	// can reach the server) or "off" (not served).
	Metrics string
	// SecureCookies marks the session cookie Secure even when the request
	// came over plain HTTP: set it when a TLS proxy in front of the server
	// serves the pages over HTTPS (requests that come over TLS always get
	// Secure cookies).
	SecureCookies bool
	// Rate and Burst limit each person's requests: Rate per second on
	// average, Burst at once (defaults 200 and 400).
	Rate  float64
	Burst int
	// MaxBody limits JSON request bodies (default 64 KiB); MaxImport limits
	// item, label and gold imports (default 256 MiB).
	MaxBody, MaxImport int64
	// RequestTimeout bounds the work of one ordinary request (default 30 s;
	// imports and exports are bounded by the server's write timeout).
	RequestTimeout time.Duration
	// TokenCache is how long a verified token is remembered (default 5 min).
	TokenCache time.Duration
	// SessionTime is how long a page session lasts (default 12 hours).
	SessionTime time.Duration
	// Seed seeds rounds run from the board.
	Seed uint64
	// GroupSize caps the writes that share one commit (see
	// store.SetGroupSize); ≤ 0 keeps the default (2000).
	GroupSize int
	// GCPercent is the garbage collector's target (runtime/debug
	// SetGCPercent) while the service runs; Close puts back the one before.
	// 0 means DefaultGCPercent unless the GOGC environment variable is set
	// (then it is left alone); negative leaves it alone.
	GCPercent int
	// Now gives the time (time.Now if nil); tests set it.
	Now func() time.Time
	// Logf, if set, receives one line per server event (not per request).
	Logf func(format string, a ...any)
}

// FromFlags checks the settings as `loop serve`'s flags give them, where 0
// means none (practice, check) or no limit (check attempts, change window),
// and turns those zeros into Config's own convention (negative, or the
// shortest window). It returns an error naming the first flag out of range.
func (c *Config) FromFlags() error {
	switch {
	case c.Redundancy < 1:
		return fmt.Errorf("--redundancy must be at least 1, not %d", c.Redundancy)
	case c.LeaseTime < time.Second:
		return fmt.Errorf("--lease must be at least 1s, not %s", c.LeaseTime)
	case c.PassMark <= 0 || c.PassMark > 1:
		return fmt.Errorf("--pass-mark must be in (0, 1], not %g", c.PassMark)
	case c.Rate <= 0 || c.Burst < 1:
		return fmt.Errorf("--rate must be > 0 and --burst ≥ 1")
	case c.Practice < 0 || c.Check < 0 || c.CheckAttempts < 0:
		return fmt.Errorf("--practice, --check and --check-attempts must be ≥ 0")
	case c.ChangeWindow < 0:
		return fmt.Errorf("--change-window must be ≥ 0")
	case c.Metrics != "admin" && c.Metrics != "open" && c.Metrics != "off":
		return fmt.Errorf("--metrics %q: use admin, open or off", c.Metrics)
	}
	for _, n := range []*int{&c.Practice, &c.Check, &c.CheckAttempts} {
		if *n == 0 {
			*n = -1
		}
	}
	if c.ChangeWindow == 0 {
		c.ChangeWindow = time.Nanosecond // no changes after the answer
	}
	return nil
}

// DefaultGCPercent is the garbage collector's target while the service
// runs (Config.GCPercent). The service keeps little live data (the work
// pool) and allocates a few kilobytes per request, so at Go's default of 100
// it collects many times a second; under load at 200 annotators the
// collections and their assists took about a tenth of the CPU and held up
// the group commit. At 400 the heap may grow to five times the live data
// (tens of megabytes for a project of 40,000 items).
const DefaultGCPercent = 400

func (c *Config) defaults() {
	if c.GCPercent == 0 {
		if os.Getenv("GOGC") != "" {
			c.GCPercent = -1
		} else {
			c.GCPercent = DefaultGCPercent
		}
	}
	if c.LeaseTime <= 0 {
		c.LeaseTime = 10 * time.Minute
	}
	if c.Redundancy <= 0 {
		c.Redundancy = 3
	}
	if c.Practice == 0 {
		c.Practice = 3
	}
	if c.Check == 0 {
		c.Check = 5
	}
	if c.Practice < 0 {
		c.Practice = 0
	}
	if c.Check < 0 {
		c.Check = 0
	}
	if c.CheckAttempts == 0 {
		c.CheckAttempts = 3
	}
	if c.ChangeWindow <= 0 {
		c.ChangeWindow = 10 * time.Minute
	}
	if c.Metrics == "" {
		c.Metrics = "admin"
	}
	if c.PassMark <= 0 || c.PassMark > 1 {
		c.PassMark = 0.8
	}
	if c.Rate <= 0 {
		c.Rate = 200
	}
	if c.Burst <= 0 {
		c.Burst = 400
	}
	if c.MaxBody <= 0 {
		c.MaxBody = 64 << 10
	}
	if c.MaxImport <= 0 {
		c.MaxImport = 256 << 20
	}
	if c.RequestTimeout <= 0 {
		c.RequestTimeout = 30 * time.Second
	}
	if c.TokenCache <= 0 {
		c.TokenCache = 5 * time.Minute
	}
	if c.SessionTime <= 0 {
		c.SessionTime = 12 * time.Hour
	}
	if c.Now == nil {
		c.Now = time.Now
	}
	if c.Logf == nil {
		c.Logf = func(string, ...any) {}
	}
}

// Server is the HTTP service of one open project.
type Server struct {
	st      *store.Store
	cfg     Config
	e       *echo.Echo
	pool    *pool
	auth    *auth
	metrics *metrics
	rounds  *roundRunner

	views viewCache // item views handed out

	trMu  sync.Mutex
	trSet *practiceSet // cached practice split (nil: read gold again)

	gcSet    bool // New changed the collector's target; gcBefore is the one before
	gcBefore int

	stop     chan struct{}
	stopOnce sync.Once
	wg       sync.WaitGroup
	bg       sync.WaitGroup // background writes (stored copies of leases)
}

// background runs a write whose result no request waits for (the stored
// copy of a lease); failures are logged. Close waits for them.
func (sv *Server) background(fn func() error) {
	sv.bg.Add(1)
	go func() {
		defer sv.bg.Done()
		if err := fn(); err != nil {
			sv.cfg.Logf("background write: %v", err)
		}
	}()
}

// New builds the service for an open store: it loads the work pool (items,
// label counts, live leases) and starts the lease sweeper. Call Close when
// done; the store stays open and is the caller's to close.
func New(st *store.Store, cfg Config) (*Server, error) {
	cfg.defaults()
	switch cfg.Metrics {
	case "admin", "open", "off":
	default:
		return nil, fmt.Errorf("metrics %q: use admin, open or off", cfg.Metrics)
	}
	st.SetGroupSize(cfg.GroupSize)
	sv := &Server{st: st, cfg: cfg, stop: make(chan struct{})}
	sv.metrics = newMetrics()
	p, err := newPool(st, cfg, sv.metrics)
	if err != nil {
		return nil, fmt.Errorf("loading the work pool: %w", err)
	}
	sv.pool = p
	sv.auth = newAuth(st, cfg)
	sv.rounds = newRoundRunner(sv)
	sv.e = sv.routes()
	if cfg.GCPercent > 0 {
		sv.gcSet, sv.gcBefore = true, debug.SetGCPercent(cfg.GCPercent)
	}
	sv.wg.Add(1)
	go sv.sweep()
	return sv, nil
}

// Refresh reads again what the service keeps in memory from the store —
// the work pool (items, label counts, the latest next batch), the practice
// items and the item views — after something wrote to the store behind the
// service's back (a command run beside it).
func (sv *Server) Refresh() error {
	sv.views.clear()
	sv.forgetPractice()
	return sv.pool.rebuild()
}

// Handler returns the service's HTTP handler.
func (sv *Server) Handler() http.Handler { return sv.e }

// Close stops the lease sweeper and waits for a running round to finish.
func (sv *Server) Close() {
	sv.stopOnce.Do(func() {
		close(sv.stop)
		if sv.gcSet {
			debug.SetGCPercent(sv.gcBefore)
		}
	})
	sv.wg.Wait()
	sv.rounds.wait()
	sv.bg.Wait()
}

// sweep returns expired leases to the pool once a second and forgets
// stored leases an hour after they expired (until then a late answer under
// one is refused as expired rather than unknown).
func (sv *Server) sweep() {
	defer sv.wg.Done()
	t := time.NewTicker(time.Second)
	defer t.Stop()
	for {
		select {
		case <-sv.stop:
			return
		case <-t.C:
			old := sv.pool.expire(sv.cfg.Now())
			if len(old) > 0 {
				if err := sv.st.EndLeases(old); err != nil {
					sv.cfg.Logf("forgetting %d old leases: %v", len(old), err)
				}
			}
		}
	}
}

// Serve answers requests on ln until ctx is done, then shuts down
// gracefully (in-flight requests get up to 10 seconds).
func (sv *Server) Serve(ctx context.Context, ln net.Listener) error {
	hs := &http.Server{
		Handler:           sv.e,
		ReadHeaderTimeout: 10 * time.Second,
		ReadTimeout:       5 * time.Minute,
		WriteTimeout:      10 * time.Minute,
		IdleTimeout:       2 * time.Minute,
		MaxHeaderBytes:    64 << 10,
	}
	errc := make(chan error, 1)
	go func() { errc <- hs.Serve(ln) }()
	select {
	case err := <-errc:
		return err
	case <-ctx.Done():
		sctx, cancel := context.WithTimeout(context.Background(), 10*time.Second)
		defer cancel()
		err := hs.Shutdown(sctx)
		if e := <-errc; e != nil && !errors.Is(e, http.ErrServerClosed) && err == nil {
			err = e
		}
		return err
	}
}
