package api

import (
	"context"
	"fmt"
	"io/fs"
	"net/http"
	"strings"
	"time"

	"github.com/labstack/echo/v4"

	"handoff/web"
)

// route is one entry of the service's route table. The OpenAPI document
// describes exactly these (a test checks both ways).
type route struct {
	method  string
	path    string // echo pattern (":id")
	need    access
	changes bool  // changes something: cookie sessions need the CSRF header
	limit   int64 // body limit; 0 means Config.MaxBody
	long    bool  // imports, exports, reports: no per-request timeout
	handler echo.HandlerFunc
}

func (sv *Server) table() []route {
	return []route{
		// Sessions (pages).
		{method: "POST", path: "/api/v1/session", need: public, handler: sv.postSession},
		{method: "GET", path: "/api/v1/session", need: signedIn, handler: sv.getSession},
		{method: "DELETE", path: "/api/v1/session", need: signedIn, changes: true, handler: sv.deleteSession},
		// Annotators.
		{method: "GET", path: "/api/v1/codebook", need: signedIn, handler: sv.getCodebook},
		{method: "GET", path: "/api/v1/me", need: signedIn, handler: sv.getMe},
		{method: "GET", path: "/api/v1/me/labels", need: signedIn, handler: sv.getMyLabels},
		{method: "PUT", path: "/api/v1/me/labels/last", need: signedIn, changes: true, handler: sv.putLastLabel},
		{method: "GET", path: "/api/v1/next", need: signedIn, changes: true, handler: sv.getNext},
		{method: "POST", path: "/api/v1/labels", need: signedIn, changes: true, handler: sv.postLabel},
		{method: "POST", path: "/api/v1/leases/:id/skip", need: signedIn, changes: true, handler: sv.postSkip},
		{method: "GET", path: "/api/v1/items/:id/image", need: signedIn, handler: sv.getImage},
		{method: "GET", path: "/api/v1/practice", need: signedIn, changes: true, handler: sv.getPractice},
		{method: "POST", path: "/api/v1/practice/answers", need: signedIn, changes: true, handler: sv.postPracticeAnswer},
		{method: "POST", path: "/api/v1/practice/retry", need: signedIn, changes: true, handler: sv.postPracticeRetry},
		// The team.
		{method: "GET", path: "/api/v1/status", need: adminOnly, handler: sv.getStatus},
		{method: "GET", path: "/api/v1/labels-per-day", need: adminOnly, handler: sv.getLabelsPerDay},
		{method: "GET", path: "/api/v1/waves", need: adminOnly, long: true, handler: sv.getWaves},
		{method: "POST", path: "/api/v1/waves", need: adminOnly, changes: true, handler: sv.postWave},
		{method: "GET", path: "/api/v1/people", need: adminOnly, handler: sv.getPeople},
		{method: "POST", path: "/api/v1/people", need: adminOnly, changes: true, handler: sv.postPeople},
		{method: "POST", path: "/api/v1/people/:id/tokens", need: adminOnly, changes: true, handler: sv.postPersonToken},
		{method: "DELETE", path: "/api/v1/people/:id/tokens", need: adminOnly, changes: true, handler: sv.deletePersonTokens},
		{method: "POST", path: "/api/v1/people/:id/check", need: adminOnly, changes: true, handler: sv.postPersonCheck},
		{method: "DELETE", path: "/api/v1/tokens/:id", need: adminOnly, changes: true, handler: sv.deleteToken},
		{method: "POST", path: "/api/v1/items", need: adminOnly, changes: true, limit: -1, long: true, handler: sv.postItems},
		{method: "POST", path: "/api/v1/labels/import", need: adminOnly, changes: true, limit: -1, long: true, handler: sv.postLabelsImport},
		{method: "POST", path: "/api/v1/gold", need: adminOnly, changes: true, limit: -1, long: true, handler: sv.postGold},
		{method: "GET", path: "/api/v1/agreement", need: adminOnly, long: true, handler: sv.getAgreement},
		{method: "GET", path: "/api/v1/annotators", need: adminOnly, long: true, handler: sv.getAnnotators},
		{method: "GET", path: "/api/v1/unsure", need: adminOnly, handler: sv.getUnsure},
		{method: "GET", path: "/api/v1/settings", need: adminOnly, handler: sv.getSettings},
		{method: "POST", path: "/api/v1/rounds", need: adminOnly, changes: true, handler: sv.postRound},
		{method: "GET", path: "/api/v1/rounds", need: adminOnly, handler: sv.getRounds},
		{method: "GET", path: "/api/v1/next-batch", need: adminOnly, handler: sv.getNextBatch},
		{method: "GET", path: "/api/v1/verdict", need: adminOnly, handler: sv.getVerdict},
		{method: "GET", path: "/api/v1/verdict/report", need: adminOnly, long: true, handler: sv.getVerdictReport},
		{method: "GET", path: "/api/v1/export", need: adminOnly, long: true, handler: sv.getExport},
		{method: "GET", path: "/api/v1/export/labels", need: adminOnly, long: true, handler: sv.getExportLabels},
		// Public.
		{method: "GET", path: "/api/v1/openapi.json", need: public, handler: sv.getOpenAPI},
		{method: "GET", path: "/api/v1/health", need: public, handler: sv.getHealth},
	}
}

// securityHeaders sets a strict content security policy (scripts and
// styles only from this server, nothing inline, no framing) and friends.
func securityHeaders(next echo.HandlerFunc) echo.HandlerFunc {
	return func(c echo.Context) error {
		h := c.Response().Header()
		h.Set("Content-Security-Policy", "default-src 'self'; script-src 'self'; style-src 'self'; img-src 'self' data: blob:; "+
			"connect-src 'self'; frame-src 'self'; frame-ancestors 'none'; object-src 'none'; base-uri 'none'; form-action 'self'")
		h.Set("X-Content-Type-Options", "nosniff")
		h.Set("X-Frame-Options", "DENY")
		h.Set("Referrer-Policy", "no-referrer")
		h.Set("Cache-Control", "no-store")
		return next(c)
	}
}

// recover turns a panic in a handler into a 500 (logged) instead of a
// dropped connection.
func (sv *Server) recover(next echo.HandlerFunc) echo.HandlerFunc {
	return func(c echo.Context) (err error) {
		defer func() {
			if r := recover(); r != nil {
				if r == http.ErrAbortHandler {
					panic(r)
				}
				err = fmt.Errorf("panic: %v", r)
			}
		}()
		return next(c)
	}
}

func (sv *Server) timeout(next echo.HandlerFunc) echo.HandlerFunc {
	return func(c echo.Context) error {
		ctx, cancel := context.WithTimeout(c.Request().Context(), sv.cfg.RequestTimeout)
		defer cancel()
		c.SetRequest(c.Request().WithContext(ctx))
		return next(c)
	}
}

func (sv *Server) routes() *echo.Echo {
	e := echo.New()
	e.HideBanner, e.HidePort = true, true
	e.HTTPErrorHandler = sv.errorHandler
	e.IPExtractor = echo.ExtractIPDirect()
	e.Use(sv.recover)
	e.Use(sv.metrics.observe)
	e.Use(securityHeaders)
	for _, r := range sv.table() {
		mw := []echo.MiddlewareFunc{}
		switch {
		case r.limit < 0:
			mw = append(mw, limitBody(sv.cfg.MaxImport))
		case r.limit > 0:
			mw = append(mw, limitBody(r.limit))
		default:
			mw = append(mw, limitBody(sv.cfg.MaxBody))
		}
		if !r.long {
			mw = append(mw, sv.timeout)
		}
		mw = append(mw, sv.authenticate(r.need, r.changes))
		e.Add(r.method, r.path, r.handler, mw...)
	}
	switch sv.cfg.Metrics {
	case "open":
		e.GET("/metrics", echo.WrapHandler(sv.metrics.handler()))
	case "admin":
		e.GET("/metrics", echo.WrapHandler(sv.metrics.handler()), sv.authenticate(adminOnly, false))
	}
	sv.pages(e)
	return e
}

// pages serves the embedded pages and their assets.
func (sv *Server) pages(e *echo.Echo) {
	assets, err := fs.Sub(web.FS, "static")
	if err != nil {
		panic(err) // the embedded tree is fixed at build time
	}
	page := func(name string) echo.HandlerFunc {
		return func(c echo.Context) error {
			b, err := fs.ReadFile(assets, name)
			if err != nil {
				return err
			}
			return c.HTMLBlob(http.StatusOK, b)
		}
	}
	e.GET("/", func(c echo.Context) error { return c.Redirect(http.StatusSeeOther, "/label") })
	e.GET("/signin", page("signin.html"))
	e.GET("/label", page("label.html"))
	e.GET("/board", page("board.html"))
	static := http.StripPrefix("/static/", http.FileServer(http.FS(assets)))
	e.GET("/static/*", func(c echo.Context) error {
		name := c.Param("*")
		if strings.HasSuffix(name, ".html") || name == "" {
			return jsonError(http.StatusNotFound, "no such file")
		}
		c.Response().Header().Set("Cache-Control", "max-age=300")
		static.ServeHTTP(c.Response(), c.Request())
		return nil
	})
}

func (sv *Server) getHealth(c echo.Context) error {
	return c.JSON(http.StatusOK, map[string]any{"ok": true, "time": sv.cfg.Now().UTC().Format(time.RFC3339)})
}
