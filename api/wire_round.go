package api

import (
	"context"
	"encoding/json"
	"errors"
	"net/http"

	"github.com/labstack/echo/v4"

	"handoff/round"
	"handoff/verdict"
)

// RoundSummary is what a finished round reports to the board. Unchanged
// is set (and nothing else) when no label was new since the last round, so
// the round changed nothing.
type RoundSummary struct {
	Round     int    `json:"round"`
	Look      int    `json:"look"`
	Model     string `json:"model"`
	HeldOut   int    `json:"held_out"`
	Pool      int    `json:"pool"`
	Batch     int    `json:"batch"`
	Go        bool   `json:"go"`
	Headline  string `json:"headline"`
	Unchanged bool   `json:"unchanged,omitempty"`
}

// runRound runs one round with the project's stored settings (the same
// ones `loop round` uses; `loop config DIR` shows them).
func runRound(ctx context.Context, sv *Server, source string) (json.RawMessage, error) {
	r, err := round.RunWith(sv.st, round.RunOptions{}, source)
	if errors.Is(err, round.ErrNoNewLabels) {
		return json.Marshal(RoundSummary{Unchanged: true, Headline: err.Error()})
	}
	if err != nil {
		return nil, err
	}
	s := RoundSummary{Round: r.Round, Look: r.Look, Model: r.Model, HeldOut: r.HeldOut, Pool: r.Pool, Batch: len(r.Batch)}
	if r.Verdict != nil {
		s.Go = r.Verdict.Decision.Go
		s.Headline = r.Verdict.Headline()
	}
	return json.Marshal(s)
}

func (sv *Server) verdictReport() (*verdictReport, error) {
	rep, err := round.Verdict(sv.st, round.VerdictConfig{})
	if errors.Is(err, round.ErrNothing) {
		return nil, codedError(http.StatusConflict, "nothing_yet", "%v", err)
	}
	if err != nil {
		return nil, err
	}
	return &verdictReport{rep}, nil
}

func (sv *Server) getVerdict(c echo.Context) error {
	v, err := sv.verdictReport()
	if err != nil {
		return err
	}
	c.Response().Header().Set("Content-Type", "application/json")
	c.Response().WriteHeader(http.StatusOK)
	return v.WriteJSON(c.Response())
}

// getVerdictReport serves the verdict's self-contained HTML report (inline
// SVG plots and styles, no scripts) for the board to frame. Its policy
// allows inline styles and images only, and framing by this site only.
func (sv *Server) getVerdictReport(c echo.Context) error {
	v, err := sv.verdictReport()
	if err != nil {
		return err
	}
	h := c.Response().Header()
	h.Set("Content-Security-Policy", "default-src 'none'; style-src 'unsafe-inline'; img-src data:; frame-ancestors 'self'; sandbox allow-same-origin")
	h.Set("X-Frame-Options", "SAMEORIGIN")
	h.Set("Content-Type", "text/html; charset=utf-8")
	c.Response().WriteHeader(http.StatusOK)
	return v.WriteHTML(c.Response(), "Verdict")
}

type verdictReport struct{ *verdict.Report }
