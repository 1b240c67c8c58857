package api

import (
	"context"
	"encoding/json"
	"net/http"
	"sync"
	"time"

	"github.com/labstack/echo/v4"
)

// RoundJob is the state of the round started from the service, if any.
// State is "idle" (none started since the server started), "running",
// "done" or "failed" (Error says why).
type RoundJob struct {
	State    string          `json:"state"`
	Started  *time.Time      `json:"started,omitempty"`
	Finished *time.Time      `json:"finished,omitempty"`
	Seconds  float64         `json:"seconds,omitempty"`
	Error    string          `json:"error,omitempty"`
	Result   json.RawMessage `json:"result,omitempty"`
}

// roundRunner runs one round at a time in the background, so that the
// request that starts it returns at once (202) and the board polls.
type roundRunner struct {
	sv  *Server
	mu  sync.Mutex
	cur RoundJob
	wg  sync.WaitGroup
}

func newRoundRunner(sv *Server) *roundRunner {
	return &roundRunner{sv: sv, cur: RoundJob{State: "idle"}}
}

func (r *roundRunner) job() RoundJob {
	r.mu.Lock()
	defer r.mu.Unlock()
	return r.cur
}

func (r *roundRunner) wait() { r.wg.Wait() }

// start begins a round unless one is running.
func (r *roundRunner) start(source string) (RoundJob, bool) {
	r.mu.Lock()
	defer r.mu.Unlock()
	if r.cur.State == "running" {
		return r.cur, false
	}
	now := r.sv.cfg.Now().UTC()
	r.cur = RoundJob{State: "running", Started: &now}
	r.wg.Add(1)
	go func() {
		defer r.wg.Done()
		t0 := time.Now()
		res, err := runRound(context.Background(), r.sv, source)
		d := time.Since(t0)
		end := r.sv.cfg.Now().UTC()
		r.mu.Lock()
		r.cur.Finished, r.cur.Seconds = &end, d.Seconds()
		if err != nil {
			r.cur.State, r.cur.Error = "failed", err.Error()
			r.sv.metrics.rounds.WithLabelValues("error").Observe(d.Seconds())
		} else {
			r.cur.State, r.cur.Result = "done", res
			r.sv.metrics.rounds.WithLabelValues("ok").Observe(d.Seconds())
		}
		r.mu.Unlock()
		if err == nil {
			if err := r.sv.pool.rebuild(); err != nil {
				r.sv.cfg.Logf("reloading the pool after the round: %v", err)
			}
		}
	}()
	return r.cur, true
}

func (sv *Server) postRound(c echo.Context) error {
	j, ok := sv.rounds.start(sv.source(c))
	if !ok {
		return c.JSON(http.StatusConflict, map[string]any{"error": "a round is already running", "status": http.StatusConflict, "round_job": j})
	}
	return c.JSON(http.StatusAccepted, map[string]any{"round_job": j})
}

func (sv *Server) getRounds(c echo.Context) error {
	rs, err := sv.st.Rounds()
	if err != nil {
		return err
	}
	out := make([]map[string]any, 0, len(rs))
	for _, r := range rs {
		var v any
		if json.Unmarshal(r.Data, &v) != nil {
			v = nil
		}
		out = append(out, map[string]any{"round": r.N, "record": v})
	}
	return c.JSON(http.StatusOK, map[string]any{"rounds": out, "round_job": sv.rounds.job()})
}
