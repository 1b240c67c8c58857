package api

import (
	"errors"
	"mime"
	"net/http"
	"net/url"
	"os"
	"path/filepath"
	"strings"
	"sync"
	"time"

	"github.com/labstack/echo/v4"

	"handoff"
	"handoff/store"
)

// ItemView is an item as a person sees it: its id and text, or the address
// of its image. Parent, covariates and the file path are never shown.
type ItemView struct {
	ID    string       `json:"id"`
	Kind  handoff.Kind `json:"kind"`
	Text  string       `json:"text,omitempty"`
	Image string       `json:"image,omitempty"`
}

// viewCache remembers the views of items handed out, so that handing out
// work reads no item from the store. The service is the only writer of the
// project while it runs; an item import clears the cache (and bumps gen, so
// that a view read before the clear is not stored after it).
type viewCache struct {
	mu  sync.RWMutex
	gen uint64
	m   map[string]ItemView
}

func (c *viewCache) get(id string) (ItemView, uint64, bool) {
	c.mu.RLock()
	defer c.mu.RUnlock()
	v, ok := c.m[id]
	return v, c.gen, ok
}

func (c *viewCache) put(gen uint64, v ItemView) {
	c.mu.Lock()
	defer c.mu.Unlock()
	if gen != c.gen {
		return
	}
	if c.m == nil {
		c.m = map[string]ItemView{}
	}
	c.m[v.ID] = v
}

func (c *viewCache) clear() {
	c.mu.Lock()
	defer c.mu.Unlock()
	c.gen++
	c.m = nil
}

// itemViewOf returns the view of item id, from the cache or the store.
func (sv *Server) itemViewOf(id string) (ItemView, error) {
	v, gen, ok := sv.views.get(id)
	if ok {
		return v, nil
	}
	it, _, err := sv.st.Item(id)
	if err != nil {
		return ItemView{}, err
	}
	v = itemView(it)
	sv.views.put(gen, v)
	return v, nil
}

func itemView(it handoff.Item) ItemView {
	v := ItemView{ID: it.ID, Kind: it.Kind}
	switch it.Kind {
	case handoff.KindText:
		v.Text = it.Text
	case handoff.KindImage:
		v.Image = "/api/v1/items/" + url.PathEscape(it.ID) + "/image"
	}
	return v
}

// LeaseView is a lease as its holder sees it.
type LeaseView struct {
	ID      string    `json:"id"`
	Item    string    `json:"item"`
	Expires time.Time `json:"expires"`
}

// NextReply is the answer to GET /api/v1/next. Item and Lease are nil when
// nothing is waiting for this person.
type NextReply struct {
	Lease    *LeaseView `json:"lease"`
	Item     *ItemView  `json:"item"`
	Progress Progress   `json:"progress"`
	Message  string     `json:"message,omitempty"`
}

// LabelRequest is the body of POST /api/v1/labels.
type LabelRequest struct {
	Lease          string  `json:"lease"`
	Item           string  `json:"item"`
	Label          string  `json:"label"`
	Seconds        float64 `json:"seconds,omitempty"`
	IdempotencyKey string  `json:"idempotency_key,omitempty"` // or the Idempotency-Key header
	// Next asks for the next item in the same reply (as GET /api/v1/next
	// would give it), saving a round trip.
	Next bool `json:"next,omitempty"`
}

// LabelReply acknowledges a stored label.
type LabelReply struct {
	Number    uint64        `json:"number"`
	Duplicate bool          `json:"duplicate"`
	Label     handoff.Label `json:"label"`
	Progress  Progress      `json:"progress"`
	Next      *NextReply    `json:"next,omitempty"` // when asked for
}

// SkipRequest is the body of POST /api/v1/leases/{id}/skip.
type SkipRequest struct {
	Reason string `json:"reason"` // "skip" or "unsure"
}

func (sv *Server) source(c echo.Context) string {
	s := "api " + c.Request().Method + " " + c.Path()
	if p := who(c); p != nil {
		s += " by " + p.ID
	}
	return s
}

func (sv *Server) getCodebook(c echo.Context) error {
	return c.JSON(http.StatusOK, sv.st.Codebook())
}

// MeReply describes the signed-in person.
type MeReply struct {
	ID       string       `json:"id"`
	Admin    bool         `json:"admin"`
	Progress Progress     `json:"progress"`
	Practice PracticeView `json:"practice"`
	Now      time.Time    `json:"now"`
	// ChangeSeconds is how long after an answer it may still be changed
	// (PUT /api/v1/me/labels/last).
	ChangeSeconds float64 `json:"change_seconds"`
}

func (sv *Server) getMe(c echo.Context) error {
	pr := who(c)
	now := sv.cfg.Now()
	pg, err := sv.pool.progress(pr.ID, now)
	if err != nil {
		return err
	}
	pv, err := sv.practiceView(pr.ID, sv.source(c))
	if err != nil {
		return err
	}
	return c.JSON(http.StatusOK, MeReply{ID: pr.ID, Admin: pr.Admin, Progress: pg, Practice: pv, Now: now.UTC(),
		ChangeSeconds: sv.cfg.ChangeWindow.Seconds()})
}

func (sv *Server) getMyLabels(c echo.Context) error {
	pr := who(c)
	labels, err := sv.st.LabelsBy(pr.ID)
	if err != nil && !errors.Is(err, store.ErrNotFound) {
		return err
	}
	if labels == nil {
		labels = []handoff.Label{}
	}
	return c.JSON(http.StatusOK, map[string]any{"labels": labels})
}

// ChangeRequest is the body of PUT /api/v1/me/labels/last: the item of the
// person's latest answer and the class it should have.
type ChangeRequest struct {
	Item  string `json:"item"`
	Label string `json:"label"`
}

// putLastLabel changes the class of the person's latest answer (given on
// the labelling page, within Config.ChangeWindow).
func (sv *Server) putLastLabel(c echo.Context) error {
	pr := who(c)
	var req ChangeRequest
	if err := decodeJSON(c, &req); err != nil {
		return err
	}
	cb := sv.st.Codebook()
	if _, ok := cb.Index(req.Label); !ok {
		return jsonError(http.StatusUnprocessableEntity, "field \"label\": %q is not a class of the codebook (classes: %s)", req.Label, strings.Join(cb.Keys(), ", "))
	}
	if req.Item == "" {
		return jsonError(http.StatusBadRequest, "field \"item\": missing")
	}
	l, err := sv.st.ChangeLabel(pr.ID, req.Item, req.Label, sv.cfg.Now().Add(-sv.cfg.ChangeWindow), sv.source(c))
	switch {
	case errors.Is(err, store.ErrNotLatest):
		return codedError(http.StatusConflict, "not_latest", "%v", err)
	case errors.Is(err, store.ErrTooLate):
		return codedError(http.StatusConflict, "too_late", "the answer was given more than %s ago: it can no longer be changed", sv.cfg.ChangeWindow)
	case err != nil:
		return err
	}
	return c.JSON(http.StatusOK, map[string]any{"label": l})
}

func (sv *Server) getNext(c echo.Context) error {
	nr, err := sv.nextFor(who(c))
	if err != nil {
		return err
	}
	return c.JSON(http.StatusOK, nr)
}

// nextFor hands the next item to a person (or their live lease again).
func (sv *Server) nextFor(pr *principal) (NextReply, error) {
	if !pr.Admin {
		ok, err := sv.practiceDone(pr.ID)
		if err != nil {
			return NextReply{}, err
		}
		if !ok {
			return NextReply{}, codedError(http.StatusForbidden, "practice_required", "pass the practice and the check first (see /api/v1/practice)")
		}
	}
	now := sv.cfg.Now()
	g, err := sv.pool.next(pr.ID, now)
	if err != nil {
		return NextReply{}, err
	}
	if g.lease != nil && !g.renewed {
		// The pool holds the lease from now on; the stored copy (for a
		// restart) rides along with the next group commit, so that handing
		// out work costs no disk wait and no commit of its own. A label is
		// checked against the pool.
		sl := store.ServiceLease{ID: g.lease.id, Item: g.itemID, Annotator: pr.ID, Expires: g.lease.expires.UTC()}
		sv.bg.Add(1)
		sv.st.GrantLeaseLater(sl, func(err error) {
			if err != nil {
				sv.cfg.Logf("storing lease %s: %v", sl.ID, err)
			}
			sv.bg.Done()
		})
		sv.metrics.leases.WithLabelValues("granted").Inc()
	}
	pg, err := sv.pool.progress(pr.ID, now)
	if err != nil {
		return NextReply{}, err
	}
	if g.lease == nil {
		return NextReply{Progress: pg,
			Message: "Nothing is waiting for you right now: every item has its answers or is in someone's hands. Try again later."}, nil
	}
	v, err := sv.itemViewOf(g.itemID)
	if err != nil {
		return NextReply{}, err
	}
	return NextReply{Lease: &LeaseView{ID: g.lease.id, Item: g.itemID, Expires: g.lease.expires.UTC()},
		Item: &v, Progress: pg}, nil
}

func (sv *Server) postLabel(c echo.Context) error {
	pr := who(c)
	var req LabelRequest
	if err := decodeJSON(c, &req); err != nil {
		sv.metrics.labels.WithLabelValues("refused").Inc()
		return err
	}
	err := sv.checkLabel(c, &req)
	if err != nil {
		sv.metrics.labels.WithLabelValues("refused").Inc()
		return err
	}
	now := sv.cfg.Now().UTC()
	l := handoff.Label{Item: req.Item, Annotator: pr.ID, Class: req.Label, Time: now, Seconds: req.Seconds}
	if err := sv.pool.checkLease(pr.ID, req.Lease, req.Item, now); err != nil {
		// A retry of a label already stored ended its lease: answer it
		// as the duplicate it is.
		res, found, kerr := sv.st.LabelByKey(req.Item, pr.ID, req.IdempotencyKey)
		if kerr != nil {
			return kerr
		}
		if found {
			if res.Label.Class != req.Label {
				sv.metrics.labels.WithLabelValues("refused").Inc()
				return codedError(http.StatusUnprocessableEntity, "key_reused", "key %q: %v", req.IdempotencyKey, store.ErrKeyReused)
			}
			return sv.ackLabel(c, pr, res, req.Next, now)
		}
		sv.metrics.labels.WithLabelValues("refused").Inc()
		switch {
		case errors.Is(err, errLeaseExpired):
			return codedError(http.StatusGone, "lease_expired", "%v", err)
		case errors.Is(err, errLeaseMismatch):
			return codedError(http.StatusConflict, "lease_mismatch", "%v", err)
		}
		return codedError(http.StatusConflict, "lease_unknown", "%v", err)
	}
	res, err := sv.st.Submit(store.Submission{Label: l, Key: req.IdempotencyKey, Lease: req.Lease, LeaseChecked: true}, sv.source(c))
	if err != nil {
		sv.metrics.labels.WithLabelValues("refused").Inc()
		switch {
		case errors.Is(err, store.ErrAlreadyLabelled):
			if _, ok := sv.pool.drop(pr.ID, req.Lease, false); ok {
				lid := req.Lease
				sv.background(func() error { return sv.st.EndLeases([]string{lid}) })
			}
			sv.pool.markDone(pr.ID, req.Item)
			return codedError(http.StatusConflict, "already_labelled", "%v", err)
		case errors.Is(err, store.ErrKeyReused):
			return codedError(http.StatusUnprocessableEntity, "key_reused", "%v", err)
		}
		return err
	}
	if !res.Duplicate {
		sv.pool.record(pr.ID, req.Item, req.Lease, res.N, now)
	}
	return sv.ackLabel(c, pr, res, req.Next, now)
}

// ackLabel answers a stored label: 201, or 200 for a retry; with next, the
// reply carries the person's next item.
func (sv *Server) ackLabel(c echo.Context, pr *principal, res store.SubmitResult, next bool, now time.Time) error {
	status := http.StatusCreated
	if res.Duplicate {
		status = http.StatusOK
		sv.metrics.labels.WithLabelValues("duplicate").Inc()
	} else {
		sv.metrics.labels.WithLabelValues("stored").Inc()
	}
	reply := LabelReply{Number: res.N, Duplicate: res.Duplicate, Label: res.Label}
	if next {
		nr, err := sv.nextFor(pr)
		if err != nil {
			return err
		}
		reply.Progress, reply.Next = nr.Progress, &nr
	} else {
		pg, err := sv.pool.progress(pr.ID, now)
		if err != nil {
			return err
		}
		reply.Progress = pg
	}
	return c.JSON(status, reply)
}

// checkLabel validates a label request before it reaches the store.
func (sv *Server) checkLabel(c echo.Context, req *LabelRequest) error {
	if h := c.Request().Header.Get("Idempotency-Key"); h != "" {
		if req.IdempotencyKey != "" && req.IdempotencyKey != h {
			return jsonError(http.StatusBadRequest, "the Idempotency-Key header and the idempotency_key field differ")
		}
		req.IdempotencyKey = h
	}
	if req.IdempotencyKey == "" {
		return jsonError(http.StatusBadRequest, "idempotency key missing: send an Idempotency-Key header (any unique string per label, reused on retries)")
	}
	if len(req.IdempotencyKey) > 200 {
		return jsonError(http.StatusBadRequest, "the idempotency key is longer than 200 bytes")
	}
	if req.Item == "" {
		return jsonError(http.StatusBadRequest, "field \"item\": missing")
	}
	if req.Lease == "" {
		return jsonError(http.StatusBadRequest, "field \"lease\": missing (fetch the item with GET /api/v1/next)")
	}
	if !sv.pool.known(req.Item) {
		return jsonError(http.StatusNotFound, "unknown item %q", req.Item)
	}
	cb := sv.st.Codebook()
	if _, ok := cb.Index(req.Label); !ok {
		return jsonError(http.StatusUnprocessableEntity, "field \"label\": %q is not a class of the codebook (classes: %s)", req.Label, strings.Join(cb.Keys(), ", "))
	}
	if req.Seconds < 0 || req.Seconds > 86400 || req.Seconds != req.Seconds {
		return jsonError(http.StatusUnprocessableEntity, "field \"seconds\": %v is not between 0 and 86400", req.Seconds)
	}
	return nil
}

func (sv *Server) postSkip(c echo.Context) error {
	pr := who(c)
	var req SkipRequest
	if err := decodeJSON(c, &req); err != nil {
		return err
	}
	if req.Reason != "skip" && req.Reason != "unsure" {
		return jsonError(http.StatusUnprocessableEntity, "field \"reason\": %q is not \"skip\" or \"unsure\"", req.Reason)
	}
	id := c.Param("id")
	item, ok := sv.pool.drop(pr.ID, id, true)
	if !ok {
		return jsonError(http.StatusNotFound, "no live lease %q of yours", id)
	}
	sv.background(func() error { return sv.st.EndLeases([]string{id}) })
	if req.Reason == "unsure" {
		if err := sv.st.MarkUnsure(item, pr.ID, sv.source(c)); err != nil {
			return err
		}
	}
	pg, err := sv.pool.progress(pr.ID, sv.cfg.Now())
	if err != nil {
		return err
	}
	return c.JSON(http.StatusOK, map[string]any{"item": item, "reason": req.Reason, "progress": pg})
}

// getImage serves an image item's file. The client names the item only;
// the path comes from the store. Annotators may fetch the image of an item
// they hold, have labelled, or meet in the practice or the check; admins
// any.
func (sv *Server) getImage(c echo.Context) error {
	pr := who(c)
	if len(c.QueryParams()) > 0 {
		return jsonError(http.StatusBadRequest, "image requests take no parameters: name the item in the path only")
	}
	id, err := url.PathUnescape(c.Param("id"))
	if err != nil || id == "" {
		return jsonError(http.StatusBadRequest, "bad item id in the path")
	}
	if strings.ContainsAny(id, `/\`) || strings.Contains(id, "..") || filepath.IsAbs(id) {
		return jsonError(http.StatusBadRequest, "images are served by item id, not by path")
	}
	it, _, err := sv.st.Item(id)
	if errors.Is(err, store.ErrNotFound) {
		return jsonError(http.StatusNotFound, "unknown item %q", id)
	}
	if err != nil {
		return err
	}
	if it.Kind != handoff.KindImage {
		return jsonError(http.StatusNotFound, "item %q is not an image", id)
	}
	if !pr.Admin {
		ok, err := sv.maySee(pr.ID, id)
		if err != nil {
			return err
		}
		if !ok {
			return jsonError(http.StatusForbidden, "you may see the images of items you hold or have labelled")
		}
	}
	f, err := os.Open(it.Path)
	if err != nil {
		return jsonError(http.StatusNotFound, "the image file of item %q is missing on the server", id)
	}
	defer f.Close()
	fi, err := f.Stat()
	if err != nil || !fi.Mode().IsRegular() {
		return jsonError(http.StatusNotFound, "the image file of item %q is missing on the server", id)
	}
	ct := mime.TypeByExtension(strings.ToLower(filepath.Ext(it.Path)))
	if !strings.HasPrefix(ct, "image/") {
		var head [512]byte
		n, _ := f.ReadAt(head[:], 0)
		ct = http.DetectContentType(head[:n])
	}
	if !strings.HasPrefix(ct, "image/") || strings.Contains(ct, "svg") {
		return jsonError(http.StatusUnsupportedMediaType, "the file of item %q is not a raster image", id)
	}
	c.Response().Header().Set("Content-Type", ct)
	c.Response().Header().Set("Cache-Control", "private, max-age=600")
	http.ServeContent(c.Response(), c.Request(), "", fi.ModTime(), f)
	return nil
}

// maySee reports whether an annotator may see an item's image.
func (sv *Server) maySee(person, item string) (bool, error) {
	if sv.pool.holds(person, item, sv.cfg.Now()) {
		return true, nil
	}
	ok, err := sv.practiceShows(person, item)
	if err != nil || ok {
		return ok, err
	}
	labels, err := sv.st.LabelsBy(person)
	if err != nil && !errors.Is(err, store.ErrNotFound) {
		return false, err
	}
	for _, l := range labels {
		if l.Item == item {
			return true, nil
		}
	}
	return false, nil
}

// SessionRequest is the body of POST /api/v1/session.
type SessionRequest struct {
	Token string `json:"token"`
}

// SessionReply says who is signed in and gives the session's CSRF token,
// to be sent as the X-CSRF-Token header with every request that changes
// something.
type SessionReply struct {
	ID    string `json:"id"`
	Admin bool   `json:"admin"`
	CSRF  string `json:"csrf"`
}

func (sv *Server) postSession(c echo.Context) error {
	if o := c.Request().Header.Get("Origin"); o != "" {
		u, err := url.Parse(o)
		if err != nil || u.Host != c.Request().Host {
			return jsonError(http.StatusForbidden, "sign-in from another site is refused")
		}
	}
	var req SessionRequest
	if err := decodeJSON(c, &req); err != nil {
		return err
	}
	id, tid, err := sv.auth.verify(strings.TrimSpace(req.Token), c.RealIP())
	if err != nil {
		return signInError(err)
	}
	p, err := sv.auth.person(id)
	if err != nil {
		return jsonError(http.StatusUnauthorized, "the token's person is no longer in the project")
	}
	s := sv.auth.newSession(p.ID, tid)
	c.SetCookie(&http.Cookie{Name: sessionCookie, Value: s.id, Path: "/", HttpOnly: true,
		SameSite: http.SameSiteStrictMode, Secure: sv.secure(c), MaxAge: int(sv.cfg.SessionTime.Seconds())})
	return c.JSON(http.StatusOK, SessionReply{ID: p.ID, Admin: p.Admin, CSRF: s.csrf})
}

// secure reports whether cookies get the Secure attribute: the request came
// over TLS, or Config.SecureCookies says a TLS proxy serves the pages.
func (sv *Server) secure(c echo.Context) bool {
	return sv.cfg.SecureCookies || c.Request().TLS != nil
}

func (sv *Server) getSession(c echo.Context) error {
	pr := who(c)
	r := SessionReply{ID: pr.ID, Admin: pr.Admin}
	if pr.Session != nil {
		r.CSRF = pr.Session.csrf
	}
	return c.JSON(http.StatusOK, r)
}

func (sv *Server) deleteSession(c echo.Context) error {
	pr := who(c)
	if pr.Session != nil {
		sv.auth.endSession(pr.Session.id)
	}
	c.SetCookie(&http.Cookie{Name: sessionCookie, Value: "", Path: "/", HttpOnly: true,
		SameSite: http.SameSiteStrictMode, Secure: sv.secure(c), MaxAge: -1})
	return c.JSON(http.StatusOK, map[string]any{"signed_out": true})
}
