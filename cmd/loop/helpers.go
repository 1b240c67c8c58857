package main

import (
	"github.com/spf13/cobra"

	"handoff/internal/beside"
	"handoff/internal/cli"
	"handoff/round"
	"handoff/store"
)

// importChunk, if > 0, overrides the store's records per import
// transaction (tests set it small to exercise the rollback of chunked
// imports).
var importChunk int

// openStore opens the project in dir. In a process that serves dir
// (`loop serve`, running a command sent to it) it returns a borrowed handle
// on the open store, whose Close leaves it open; where another process
// holds the project, the error says which server and what to do.
func openStore(dir string) (*store.Store, error) {
	if s, ok := beside.Served(dir); ok {
		s.ImportChunk = importChunk
		return s, nil
	}
	if err := besideServer.Error(dir); err != nil {
		return nil, err
	}
	s, err := store.Open(dir)
	if err != nil {
		return nil, besideServer.InUse(dir, err)
	}
	s.ImportChunk = importChunk
	return s, nil
}

// onStore opens the project in dir, runs fn on it, with a spinner named
// busy ("" for none) while it runs, and closes the project.
func onStore(cmd *cobra.Command, dir, busy string, fn func(s *store.Store) error) error {
	s, err := openStore(dir)
	if err != nil {
		return err
	}
	defer s.Close()
	if busy == "" {
		return fn(s)
	}
	bar := cli.Progress(cmd, -1, busy)
	err = fn(s)
	bar.Finish()
	return err
}

// statusSections are the sections commands add to `loop status` (after
// round.Sections).
var statusSections []round.Section

// registerStatus adds a section to `loop status`. Call it from init.
func registerStatus(name string, fn func(s *store.Store) (any, string, error)) {
	statusSections = append(statusSections, round.Section{Name: name, Fn: fn})
}

// withStore is the RunE of a command whose first argument is a project:
// it opens the project, runs fn on it and closes it.
func withStore(fn func(cmd *cobra.Command, s *store.Store, args []string) error) func(*cobra.Command, []string) error {
	return func(cmd *cobra.Command, args []string) error {
		s, err := openStore(args[0])
		if err != nil {
			return err
		}
		defer s.Close()
		return fn(cmd, s, args)
	}
}
