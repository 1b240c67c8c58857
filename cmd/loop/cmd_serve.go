package main

import (
	"context"
	"fmt"
	"net"
	"os"
	"os/signal"
	"syscall"
	"time"

	"github.com/spf13/cobra"

	"handoff/api"
	"handoff/internal/beside"
	"handoff/internal/cli"
)

func init() { register(newServeCmd) }

func newServeCmd() *cobra.Command {
	var (
		addr string
		cfg  api.Config
	)
	c := &cobra.Command{
		Use:     "serve DIR",
		Short:   "Serve the labelling page, the project board and the HTTP API",
		Long:    helpLong("serve"),
		Example: helpExample("serve"),
		Args:    cobra.ExactArgs(1),
		RunE: func(cmd *cobra.Command, args []string) error {
			// 0 in the flags means none (or no limit); the API's zero means
			// its default.
			if err := cfg.FromFlags(); err != nil {
				return cli.Usagef("%v", err)
			}
			dir := args[0]
			s, err := openStore(dir)
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
			// The command channel for commands run beside the server:
			// loopback only, with a secret in DIR/serve.json.
			ch, err := beside.Listen(dir, "http://"+ln.Addr().String(), s, besideServer.Allowed, runIn, func() {
				if err := sv.Refresh(); err != nil {
					cfg.Logf("reading the project again after a command: %v", err)
				}
			})
			if err != nil {
				ln.Close()
				return err
			}

			ctx, stop := signal.NotifyContext(cmd.Context(), os.Interrupt, syscall.SIGTERM)
			defer stop()
			cli.Out(cmd, "serving %s at http://%s (labelling page /label, board /board, API /api/v1)\n", dir, ln.Addr())
			err = sv.Serve(ctx, ln)
			sctx, cancel := context.WithTimeout(context.Background(), 10*time.Second)
			defer cancel()
			if serr := ch.Close(sctx); serr != nil && err == nil {
				err = serr
			}
			cli.Info(cmd, "stopped\n")
			return err
		},
	}
	f := c.Flags()
	f.StringVar(&addr, "addr", "127.0.0.1:8080", "address to listen on (host:port; port 0 picks a free one)")
	f.DurationVar(&cfg.LeaseTime, "lease", 10*time.Minute, "how long a person holds an item before it returns to the pool")
	f.IntVar(&cfg.Redundancy, "redundancy", 3, "labels wanted per item")
	f.IntVar(&cfg.Practice, "practice", 3, "gold items shown as practice, with the expert's answer, before the check (0: none)")
	f.IntVar(&cfg.Check, "check", 5, "gold items in the check before real work; answers are not shown (0: none)")
	f.Float64Var(&cfg.PassMark, "pass-mark", 0.8, "share of check answers that must match the expert's answer")
	f.IntVar(&cfg.CheckAttempts, "check-attempts", 3, "check attempts a person has before the team must grant another (0: no limit)")
	f.DurationVar(&cfg.ChangeWindow, "change-window", 10*time.Minute, "how long after answering a person may change their latest answer (0: never)")
	f.Float64Var(&cfg.Rate, "rate", 200, "requests per second allowed per person, on average")
	f.IntVar(&cfg.Burst, "burst", 400, "requests allowed per person at once")
	f.StringVar(&cfg.Metrics, "metrics", "admin", "who may read /metrics: admin (an admin token), open (anyone) or off")
	f.BoolVar(&cfg.SecureCookies, "secure-cookies", false, "mark session cookies Secure: give it when an HTTPS proxy serves the pages")
	f.Uint64Var(&cfg.Seed, "seed", 1, "seed for rounds run from the board and for bootstrap intervals")
	return c
}
