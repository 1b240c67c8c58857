package main

import (
	"fmt"
	"net"
	"os"
	"os/signal"
	"syscall"
	"time"

	"github.com/spf13/cobra"

	"handoff/api"
)

func init() { register(newServeCmd) }

func newServeCmd() *cobra.Command {
	var (
		addr string
		cfg  api.Config
	)
	c := &cobra.Command{
		Use:   "serve DIR",
		Short: "Serve the labelling page, the project board and the HTTP API",
		Long: `serve answers HTTP on --addr: people label items one at a time on the
labelling page (/label), the team follows the project on the board (/board),
and programs use the JSON API under /api/v1 (described at
/api/v1/openapi.json). Prometheus metrics are at /metrics.

People sign in with a token from ` + "`loop people add`" + `. Each item is handed
out as a lease that expires after --lease; no item is handed out beyond
--redundancy labels counting live leases. A label is acknowledged only once
it is written to disk. Before real work, annotators answer --training gold
items (with the answer shown) and a quiz of --quiz gold items that must reach
--pass-mark; a project without gold skips both.

serve runs until interrupted (Ctrl-C or SIGTERM), then finishes the requests
in flight and stops. It prints the address it listens on (useful with port 0).`,
		Example: `  loop people add proj alice --admin
  loop serve proj --addr 127.0.0.1:8080
  loop serve proj --addr 127.0.0.1:0 --lease 5m --redundancy 5 --training 0 --quiz 0`,
		Args: cobra.ExactArgs(1),
		RunE: func(cmd *cobra.Command, args []string) error {
			if cfg.Redundancy < 1 {
				return usageErrorf("--redundancy must be at least 1, not %d", cfg.Redundancy)
			}
			if cfg.LeaseTime < time.Second {
				return usageErrorf("--lease must be at least 1s, not %s", cfg.LeaseTime)
			}
			if cfg.PassMark <= 0 || cfg.PassMark > 1 {
				return usageErrorf("--pass-mark must be in (0, 1], not %g", cfg.PassMark)
			}
			if cfg.Rate <= 0 || cfg.Burst < 1 {
				return usageErrorf("--rate must be > 0 and --burst ≥ 1")
			}
			// 0 in the flags means none; the API's zero means its default.
			if cfg.Training == 0 {
				cfg.Training = -1
			}
			if cfg.Quiz == 0 {
				cfg.Quiz = -1
			}
			s, err := openStore(args[0])
			if err != nil {
				return err
			}
			defer s.Close()
			cfg.Logf = func(format string, a ...any) {
				fmt.Fprintf(cmd.ErrOrStderr(), "loop serve: "+format+"\n", a...)
			}
			sv, err := api.New(s, cfg)
			if err != nil {
				return err
			}
			defer sv.Close()
			ln, err := net.Listen("tcp", addr)
			if err != nil {
				return err
			}
			ctx, stop := signal.NotifyContext(cmd.Context(), os.Interrupt, syscall.SIGTERM)
			defer stop()
			outf(cmd, "serving %s at http://%s (labelling page /label, board /board, API /api/v1)\n", args[0], ln.Addr())
			err = sv.Serve(ctx, ln)
			infof(cmd, "stopped\n")
			return err
		},
	}
	f := c.Flags()
	f.StringVar(&addr, "addr", "127.0.0.1:8080", "address to listen on (host:port; port 0 picks a free one)")
	f.DurationVar(&cfg.LeaseTime, "lease", 10*time.Minute, "how long a person holds an item before it returns to the pool")
	f.IntVar(&cfg.Redundancy, "redundancy", 3, "labels wanted per item")
	f.IntVar(&cfg.Training, "training", 3, "gold items shown as training, with the answer, before the quiz (0: none)")
	f.IntVar(&cfg.Quiz, "quiz", 5, "gold items in the quiz before real work (0: none)")
	f.Float64Var(&cfg.PassMark, "pass-mark", 0.8, "share of quiz answers that must match the gold answer")
	f.Float64Var(&cfg.Rate, "rate", 200, "requests per second allowed per person, on average")
	f.IntVar(&cfg.Burst, "burst", 400, "requests allowed per person at once")
	f.Uint64Var(&cfg.Seed, "seed", 1, "seed for rounds run from the board and for bootstrap intervals")
	return c
}
