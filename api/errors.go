package api

import (
	"bytes"
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"mime"
	"net/http"
	"strings"

	"github.com/labstack/echo/v4"

	"handoff/ingest"
	"handoff/store"
)

// Error is the body of every error reply: what went wrong in words, and the
// HTTP status repeated.
type Error struct {
	Error  string `json:"error"`
	Status int    `json:"status"`
	// Code is a stable word for errors a client may act on
	// ("practice_required", "lease_expired", …); empty otherwise.
	Code string `json:"code,omitempty"`
}

type apiError struct {
	status int
	code   string
	msg    string
	retry  string // Retry-After, if any
}

func (e *apiError) Error() string { return e.msg }

func jsonError(status int, format string, a ...any) error {
	return &apiError{status: status, msg: fmt.Sprintf(format, a...)}
}

func codedError(status int, code, format string, a ...any) error {
	return &apiError{status: status, code: code, msg: fmt.Sprintf(format, a...)}
}

// errorHandler writes every error as JSON. Errors the handlers did not
// classify are 500s whose text is logged, not shown.
func (sv *Server) errorHandler(err error, c echo.Context) {
	if c.Response().Committed {
		return
	}
	status, body, internal := classify(err)
	var ae *apiError
	if errors.As(err, &ae) && ae.retry != "" {
		c.Response().Header().Set("Retry-After", ae.retry)
	}
	if internal {
		sv.cfg.Logf("internal error: %s %s: %v", c.Request().Method, c.Request().URL.Path, err)
	}
	if c.Request().Method == http.MethodHead {
		c.NoContent(status)
		return
	}
	c.JSON(status, body)
}

// classify maps an error to its status and body; internal is true for
// errors no handler classified (500s).
func classify(err error) (status int, body Error, internal bool) {
	var ae *apiError
	var he *echo.HTTPError
	var mb *http.MaxBytesError
	var de *store.DataError
	var ie *ingest.Error
	switch {
	case errors.As(err, &ae):
		return ae.status, Error{Error: ae.msg, Status: ae.status, Code: ae.code}, false
	case errors.As(err, &mb):
		return http.StatusRequestEntityTooLarge, Error{Error: fmt.Sprintf("the request body is larger than %d bytes", mb.Limit), Status: http.StatusRequestEntityTooLarge}, false
	case errors.As(err, &ie), errors.As(err, &de):
		return http.StatusUnprocessableEntity, Error{Error: err.Error(), Status: http.StatusUnprocessableEntity}, false
	case errors.As(err, &he):
		msg := http.StatusText(he.Code)
		if he.Code == http.StatusNotFound {
			msg = "no such route: see /api/v1/openapi.json"
		} else if he.Code == http.StatusMethodNotAllowed {
			msg = "this route does not take that method: see /api/v1/openapi.json"
		}
		return he.Code, Error{Error: msg, Status: he.Code}, false
	}
	return http.StatusInternalServerError, Error{Error: "internal error: the server's log has the details", Status: http.StatusInternalServerError}, true
}

// decodeJSON reads one JSON object from the request body into v. A body
// sent as anything but JSON (Content-Type application/json or
// application/…+json) is refused with 415; unknown fields, trailing data and
// bodies over the route's limit are errors.
func decodeJSON(c echo.Context, v any) error {
	r := c.Request()
	if r.Body == nil {
		return jsonError(http.StatusBadRequest, "empty body: send a JSON object")
	}
	if mt, _, err := mime.ParseMediaType(r.Header.Get("Content-Type")); err != nil ||
		(mt != "application/json" && !(strings.HasPrefix(mt, "application/") && strings.HasSuffix(mt, "+json"))) {
		return jsonError(http.StatusUnsupportedMediaType, "send the body as JSON, with the header Content-Type: application/json")
	}
	b, err := io.ReadAll(r.Body)
	if err != nil {
		var mb *http.MaxBytesError
		if errors.As(err, &mb) {
			return err
		}
		return jsonError(http.StatusBadRequest, "reading the body: %v", err)
	}
	if len(bytes.TrimSpace(b)) == 0 {
		return jsonError(http.StatusBadRequest, "empty body: send a JSON object")
	}
	dec := json.NewDecoder(bytes.NewReader(b))
	dec.DisallowUnknownFields()
	if err := dec.Decode(v); err != nil {
		return jsonError(http.StatusBadRequest, "malformed JSON: %v", err)
	}
	if dec.More() {
		return jsonError(http.StatusBadRequest, "malformed JSON: more than one value in the body")
	}
	return nil
}

// limitBody refuses bodies over n bytes: at once when Content-Length says
// so, otherwise when reading passes n.
func limitBody(n int64) echo.MiddlewareFunc {
	return func(next echo.HandlerFunc) echo.HandlerFunc {
		return func(c echo.Context) error {
			r := c.Request()
			if r.ContentLength > n {
				return jsonError(http.StatusRequestEntityTooLarge, "the request body has %d bytes; this route takes at most %d", r.ContentLength, n)
			}
			if r.Body != nil {
				r.Body = http.MaxBytesReader(c.Response(), r.Body, n)
			}
			return next(c)
		}
	}
}
