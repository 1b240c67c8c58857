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
	id      string // the token's id (the part before the dot)
	expires time.Time
	gen     uint64 // store.TokenGeneration when last seen in the store
}

type session struct {
	id      string
	person  string
	token   string // id of the token the session was opened with
	csrf    string
	expires time.Time
	gen     uint64 // store.TokenGeneration when its token was last seen
}

// auth holds what the service remembers about signed-in people: verified
// tokens (briefly, so that argon2id runs once per token per TokenCache),
// page sessions, the people's records, the rate limiters and the failed
// sign-ins.
//
// Failed sign-ins are counted twice: by token id (a wrong secret for a
// token that exists, which costs an argon2id computation) and by client
// address (any token that does not verify). After 10 failures at once a
// token id gets one try a second, whoever sends it; an address gets one
// try a second for tokens that are malformed or unknown. A token that
// verifies is never refused because of its address, so a client behind a
// proxy shared with someone sending bad tokens keeps working; and a token
// verified in the last TokenCache is accepted whatever its id's failures.
type auth struct {
	st  *store.Store
	cfg Config

	mu         sync.Mutex
	tokens     map[[32]byte]cachedToken
	sessions   map[string]*session
	people     map[string]*Person
	limits     map[string]*bucket
	failures   map[string]*bucket // by client address
	idFailures map[string]*bucket // by token id: wrong secrets

	// upd serialises changes to people's records (read, change, store).
	upd sync.Mutex

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
		tokens:     map[[32]byte]cachedToken{},
		sessions:   map[string]*session{},
		people:     map[string]*Person{},
		limits:     map[string]*bucket{},
		failures:   map[string]*bucket{},
		idFailures: map[string]*bucket{},
		hashing:    make(chan struct{}, max(1, runtime.GOMAXPROCS(0))),
		inflight:   map[[32]byte]*verification{},
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
// then replaces the cached one; changes to one record are serialised. If
// fn returns an error nothing is stored and the error is returned.
func (a *auth) updatePerson(id, source string, fn func(p *Person) error) (Person, error) {
	a.upd.Lock()
	defer a.upd.Unlock()
	cur, err := a.person(id)
	if err != nil {
		return Person{}, err
	}
	p := *cur
	p.Practice.CheckItems = append([]string(nil), cur.Practice.CheckItems...)
	if err := fn(&p); err != nil {
		return Person{}, err
	}
	if err := putPerson(a.st, p, source); err != nil {
		return Person{}, err
	}
	a.mu.Lock()
	a.people[id] = &p
	a.mu.Unlock()
	return p, nil
}

// Sign-in failures that are not a bad token (429s).
var (
	errTokenBlocked = errors.New("too many wrong tokens with this token id: wait a second and try again")
	errAddrBlocked  = errors.New("too many unknown or malformed tokens from this address: wait a few seconds")
)

// verify checks a token sent from addr and returns its person and the
// token's id. A token is accepted if it was verified in the last
// TokenCache and still exists in the store, or if it verifies now.
// Errors: errBadToken, errTokenBlocked, errAddrBlocked, or a store error.
func (a *auth) verify(token, addr string) (person, tokenID string, err error) {
	id, sec, ok := splitToken(token)
	if !ok {
		return "", "", a.refuse(addr, "")
	}
	d := tokenDigest(token)
	now := a.cfg.Now()
	a.mu.Lock()
	ct, cached := a.tokens[d]
	a.mu.Unlock()
	if cached && now.Before(ct.expires) {
		gen := a.st.TokenGeneration()
		if gen == ct.gen {
			return ct.person, id, nil
		}
		// Some token was revoked since: is this one still there?
		if _, err := a.st.Token(id); err == nil {
			a.mu.Lock()
			if c, ok := a.tokens[d]; ok {
				c.gen = gen
				a.tokens[d] = c
			}
			a.mu.Unlock()
			return ct.person, id, nil
		} else if !errors.Is(err, store.ErrNotFound) {
			return "", "", err
		}
		a.forgetToken(id) // revoked since it was verified
		return "", "", a.refuse(addr, "")
	}
	gen := a.st.TokenGeneration()
	rec, err := tokenRecordOf(a.st, id)
	if errors.Is(err, errBadToken) {
		return "", "", a.refuse(addr, "")
	}
	if err != nil {
		return "", "", err
	}
	if a.blockedID(id) {
		return "", "", errTokenBlocked
	}

	a.mu.Lock()
	if v, ok := a.inflight[d]; ok {
		a.mu.Unlock()
		<-v.done
		return v.person, id, v.err
	}
	v := &verification{done: make(chan struct{})}
	a.inflight[d] = v
	a.mu.Unlock()

	a.hashing <- struct{}{}
	good := rec.matches(sec)
	<-a.hashing
	if good {
		v.person = rec.Person
	} else {
		v.err = a.refuse(addr, id)
	}

	a.mu.Lock()
	delete(a.inflight, d)
	if good {
		if len(a.tokens) > 100_000 {
			clear(a.tokens)
		}
		a.tokens[d] = cachedToken{person: rec.Person, id: id, expires: now.Add(a.cfg.TokenCache), gen: gen}
	}
	a.mu.Unlock()
	close(v.done)
	return v.person, id, v.err
}

// refuse counts a failed sign-in from addr (and, for a wrong secret, of
// token id) and returns the error to send: errAddrBlocked once the address
// has used up its failures on unknown or malformed tokens, errBadToken
// otherwise.
func (a *auth) refuse(addr, id string) error {
	now := a.cfg.Now()
	a.mu.Lock()
	defer a.mu.Unlock()
	take := func(m map[string]*bucket, k string) bool {
		b, ok := m[k]
		if !ok {
			if len(m) > 10_000 {
				clear(m)
			}
			b = newBucket(1, 10, now)
			m[k] = b
		}
		return b.take(now)
	}
	if id != "" {
		take(a.idFailures, id)
		take(a.failures, addr)
		return errBadToken
	}
	if !take(a.failures, addr) {
		return errAddrBlocked
	}
	return errBadToken
}

// blockedID reports whether token id has used up its failures.
func (a *auth) blockedID(id string) bool {
	a.mu.Lock()
	defer a.mu.Unlock()
	b, ok := a.idFailures[id]
	return ok && b.empty(a.cfg.Now())
}

// forgetToken drops a token from the cache of verified tokens and ends the
// sessions opened with it.
func (a *auth) forgetToken(id string) {
	a.mu.Lock()
	defer a.mu.Unlock()
	for d, ct := range a.tokens {
		if ct.id == id {
			delete(a.tokens, d)
		}
	}
	for k, s := range a.sessions {
		if s.token == id {
			delete(a.sessions, k)
		}
	}
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

func (a *auth) newSession(person, token string) *session {
	s := &session{id: randomString(32), person: person, token: token, csrf: randomString(32),
		expires: a.cfg.Now().Add(a.cfg.SessionTime), gen: a.st.TokenGeneration()}
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

// session returns a live session whose token has not been revoked.
func (a *auth) session(id string) (*session, bool, error) {
	gen := a.st.TokenGeneration()
	a.mu.Lock()
	s, ok := a.sessions[id]
	if ok && !a.cfg.Now().Before(s.expires) {
		delete(a.sessions, id)
		ok = false
	}
	same := ok && s.gen == gen
	a.mu.Unlock()
	if !ok {
		return nil, false, nil
	}
	if same {
		return s, true, nil
	}
	if _, err := a.st.Token(s.token); errors.Is(err, store.ErrNotFound) {
		a.forgetToken(s.token)
		return nil, false, nil
	} else if err != nil {
		return nil, false, err
	}
	a.mu.Lock()
	s.gen = gen
	a.mu.Unlock()
	return s, true, nil
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
	if h := r.Header.Get("Authorization"); h != "" {
		tok, ok := strings.CutPrefix(h, "Bearer ")
		if !ok {
			return nil, jsonError(http.StatusUnauthorized, "the Authorization header must be \"Bearer TOKEN\"")
		}
		id, _, err := sv.auth.verify(strings.TrimSpace(tok), c.RealIP())
		if err != nil {
			return nil, signInError(err)
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
	s, ok, err := sv.auth.session(ck.Value)
	if err != nil {
		return nil, err
	}
	if !ok {
		return nil, jsonError(http.StatusUnauthorized, "the session has ended (or its token was revoked): sign in again")
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

// signInError turns a failed verification into its reply: 401 for a token
// that does not verify, 429 (with Retry-After) when failures are blocked.
func signInError(err error) error {
	switch {
	case errors.Is(err, errBadToken):
		return jsonError(http.StatusUnauthorized, "%v", err)
	case errors.Is(err, errTokenBlocked), errors.Is(err, errAddrBlocked):
		return &apiError{status: http.StatusTooManyRequests, msg: err.Error(), retry: "1"}
	}
	return err
}

func who(c echo.Context) *principal {
	p, _ := c.Get("who").(*principal)
	return p
}
