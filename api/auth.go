package api

import (
	"crypto/rand"
	"crypto/subtle"
	"encoding/base64"
	"errors"
	"net/http"
	"runtime"
	"strings"
	"sync"
	"time"

	"github.com/labstack/echo/v4"

	"handoff/store"
)

const (
	sessionCookie = "handoff_session"
	csrfHeader    = "X-CSRF-Token"
)

// principal is who sent a request.
type principal struct {
	ID      string
	Admin   bool
	Session *session // nil for bearer tokens
}

type cachedToken struct {
	person  string
	expires time.Time
}

type session struct {
	id      string
	person  string
	csrf    string
	expires time.Time
}

// auth holds what the service remembers about signed-in people: verified
// tokens (briefly, so that argon2id runs once per token per TokenCache),
// page sessions, the people's records, and the rate limiters.
type auth struct {
	st  *store.Store
	cfg Config

	mu       sync.Mutex
	tokens   map[[32]byte]cachedToken
	sessions map[string]*session
	people   map[string]*Person
	limits   map[string]*bucket
	failures map[string]*bucket // by client address: failed sign-ins

	// hashing bounds the argon2id computations running at once (each
	// takes 19 MiB and most of a core for ~50 ms).
	hashing chan struct{}
	// inflight lets concurrent requests with the same unverified token wait
	// for one computation.
	inflight map[[32]byte]*verification
}

type verification struct {
	done   chan struct{}
	person string
	err    error
}

func newAuth(st *store.Store, cfg Config) *auth {
	return &auth{st: st, cfg: cfg,
		tokens:   map[[32]byte]cachedToken{},
		sessions: map[string]*session{},
		people:   map[string]*Person{},
		limits:   map[string]*bucket{},
		failures: map[string]*bucket{},
		hashing:  make(chan struct{}, max(1, runtime.GOMAXPROCS(0))),
		inflight: map[[32]byte]*verification{},
	}
}

// person returns the record of a person (cached; callers must not modify
// it, use updatePerson).
func (a *auth) person(id string) (*Person, error) {
	a.mu.Lock()
	p, ok := a.people[id]
	a.mu.Unlock()
	if ok {
		return p, nil
	}
	rec, err := getPerson(a.st, id)
	if err != nil {
		return nil, err
	}
	a.mu.Lock()
	defer a.mu.Unlock()
	if p, ok := a.people[id]; ok {
		return p, nil
	}
	a.people[id] = &rec
	return &rec, nil
}

// updatePerson applies fn to a copy of a person's record, stores it, and
// then replaces the cached one.
func (a *auth) updatePerson(id, source string, fn func(p *Person)) (Person, error) {
	cur, err := a.person(id)
	if err != nil {
		return Person{}, err
	}
	p := *cur
	fn(&p)
	if err := putPerson(a.st, p, source); err != nil {
		return Person{}, err
	}
	a.mu.Lock()
	a.people[id] = &p
	a.mu.Unlock()
	return p, nil
}

// check verifies a token, using the cache when it can.
func (a *auth) check(token string) (string, error) {
	d := tokenDigest(token)
	now := a.cfg.Now()
	a.mu.Lock()
	ct, ok := a.tokens[d]
	if ok && now.Before(ct.expires) {
		a.mu.Unlock()
		return ct.person, nil
	}
	if v, ok := a.inflight[d]; ok {
		a.mu.Unlock()
		<-v.done
		return v.person, v.err
	}
	v := &verification{done: make(chan struct{})}
	a.inflight[d] = v
	a.mu.Unlock()

	a.hashing <- struct{}{}
	v.person, v.err = verifyToken(a.st, token)
	<-a.hashing

	a.mu.Lock()
	delete(a.inflight, d)
	if v.err == nil {
		if len(a.tokens) > 100_000 {
			clear(a.tokens)
		}
		a.tokens[d] = cachedToken{person: v.person, expires: now.Add(a.cfg.TokenCache)}
	}
	a.mu.Unlock()
	close(v.done)
	return v.person, v.err
}

// failed counts a failed sign-in from addr: after 10 failures at once, an
// address gets one try per second (see blocked).
func (a *auth) failed(addr string) {
	a.mu.Lock()
	defer a.mu.Unlock()
	b, ok := a.failures[addr]
	if !ok {
		if len(a.failures) > 10_000 {
			clear(a.failures)
		}
		b = newBucket(1, 10, a.cfg.Now())
		a.failures[addr] = b
	}
	b.take(a.cfg.Now())
}

// blocked reports whether addr has used up its failed sign-ins.
func (a *auth) blocked(addr string) bool {
	a.mu.Lock()
	defer a.mu.Unlock()
	b, ok := a.failures[addr]
	return ok && b.empty(a.cfg.Now())
}

// allow takes one request from a person's rate limit.
func (a *auth) allow(id string) bool {
	now := a.cfg.Now()
	a.mu.Lock()
	defer a.mu.Unlock()
	b, ok := a.limits[id]
	if !ok {
		b = newBucket(a.cfg.Rate, a.cfg.Burst, now)
		a.limits[id] = b
	}
	return b.take(now)
}

func randomString(n int) string {
	b := make([]byte, n)
	if _, err := rand.Read(b); err != nil {
		panic(err) // crypto/rand does not fail on supported systems
	}
	return base64.RawURLEncoding.EncodeToString(b)
}

func (a *auth) newSession(person string) *session {
	s := &session{id: randomString(32), person: person, csrf: randomString(32),
		expires: a.cfg.Now().Add(a.cfg.SessionTime)}
	a.mu.Lock()
	defer a.mu.Unlock()
	now := a.cfg.Now()
	if len(a.sessions) > 10_000 {
		for k, v := range a.sessions {
			if !now.Before(v.expires) {
				delete(a.sessions, k)
			}
		}
	}
	a.sessions[s.id] = s
	return s
}

func (a *auth) session(id string) (*session, bool) {
	a.mu.Lock()
	defer a.mu.Unlock()
	s, ok := a.sessions[id]
	if !ok || !a.cfg.Now().Before(s.expires) {
		delete(a.sessions, id)
		return nil, false
	}
	return s, true
}

func (a *auth) endSession(id string) {
	a.mu.Lock()
	delete(a.sessions, id)
	a.mu.Unlock()
}

// bucket is a token bucket: rate tokens a second, at most burst at once.
type bucket struct {
	rate   float64
	burst  float64
	tokens float64
	last   time.Time
}

func newBucket(rate float64, burst int, now time.Time) *bucket {
	return &bucket{rate: rate, burst: float64(burst), tokens: float64(burst), last: now}
}

func (b *bucket) fill(now time.Time) {
	if dt := now.Sub(b.last).Seconds(); dt > 0 {
		b.tokens = min(b.burst, b.tokens+dt*b.rate)
		b.last = now
	}
}

func (b *bucket) take(now time.Time) bool {
	b.fill(now)
	if b.tokens < 1 {
		return false
	}
	b.tokens--
	return true
}

func (b *bucket) empty(now time.Time) bool {
	b.fill(now)
	return b.tokens < 1
}

// access says what a route needs.
type access int

const (
	public    access = iota // anyone
	signedIn                // any person
	adminOnly               // an admin
)

// authenticate finds who sent the request: a bearer token, or a session
// cookie (then, for requests that change something, the CSRF header must
// match the session's token). It sets "who" in the context.
func (sv *Server) authenticate(need access, changes bool) echo.MiddlewareFunc {
	return func(next echo.HandlerFunc) echo.HandlerFunc {
		return func(c echo.Context) error {
			if need == public {
				return next(c)
			}
			pr, err := sv.principal(c, changes)
			if err != nil {
				return err
			}
			if need == adminOnly && !pr.Admin {
				return jsonError(http.StatusForbidden, "this route is for the project team: it needs an admin token")
			}
			if !sv.auth.allow(pr.ID) {
				c.Response().Header().Set("Retry-After", "1")
				return jsonError(http.StatusTooManyRequests, "too many requests from %s: slow down and retry in a second", pr.ID)
			}
			c.Set("who", pr)
			return next(c)
		}
	}
}

func (sv *Server) principal(c echo.Context, changes bool) (*principal, error) {
	r := c.Request()
	addr := c.RealIP()
	if h := r.Header.Get("Authorization"); h != "" {
		tok, ok := strings.CutPrefix(h, "Bearer ")
		if !ok {
			return nil, jsonError(http.StatusUnauthorized, "the Authorization header must be \"Bearer TOKEN\"")
		}
		if sv.auth.blocked(addr) {
			return nil, jsonError(http.StatusTooManyRequests, "too many failed sign-ins from this address: wait a few seconds")
		}
		id, err := sv.auth.check(strings.TrimSpace(tok))
		if err != nil {
			if errors.Is(err, errBadToken) {
				sv.auth.failed(addr)
				return nil, jsonError(http.StatusUnauthorized, "%v", err)
			}
			return nil, err
		}
		p, err := sv.auth.person(id)
		if err != nil {
			return nil, jsonError(http.StatusUnauthorized, "the token's person is no longer in the project")
		}
		return &principal{ID: p.ID, Admin: p.Admin}, nil
	}
	ck, err := r.Cookie(sessionCookie)
	if err != nil || ck.Value == "" {
		return nil, jsonError(http.StatusUnauthorized, "sign in first: send \"Authorization: Bearer TOKEN\" or sign in on the page")
	}
	s, ok := sv.auth.session(ck.Value)
	if !ok {
		return nil, jsonError(http.StatusUnauthorized, "the session has ended: sign in again")
	}
	if changes && subtle.ConstantTimeCompare([]byte(r.Header.Get(csrfHeader)), []byte(s.csrf)) != 1 {
		return nil, jsonError(http.StatusForbidden, "missing or wrong %s header for this session", csrfHeader)
	}
	p, err := sv.auth.person(s.person)
	if err != nil {
		return nil, jsonError(http.StatusUnauthorized, "the session's person is no longer in the project")
	}
	return &principal{ID: p.ID, Admin: p.Admin, Session: s}, nil
}

func who(c echo.Context) *principal {
	p, _ := c.Get("who").(*principal)
	return p
}
