package main

// Commands beside a running server (package beside does the work): the
// read and people commands listed in besideServer are sent to the server
// of their project, if one runs, and print what its run printed; others
// fail with a message that says so and what to do instead.

import (
	"errors"
	"fmt"
	"io"
	"path/filepath"
	"sort"
	"strings"

	"github.com/spf13/cobra"
	"github.com/spf13/pflag"

	"handoff/internal/beside"
	"handoff/round"
	"handoff/store"
)

// besideServer lists the commands that run beside a server, by command
// path, and whether they may change what the server keeps in memory (then
// the server reads it again afterwards).
var besideServer = map[string]bool{
	"loop status":         false,
	"loop consensus":      false,
	"loop agreement":      false,
	"loop verdict":        false,
	"loop export":         false,
	"loop rollup":         false,
	"loop compare":        false,
	"loop reference list": false,
	"loop waves":          false,
	"loop next":           true,
	"loop people add":     false,
	"loop people list":    false,
	"loop people token":   false,
	"loop people revoke":  false,
}

// pathFlags are the flags of those commands that name files, made absolute
// before a command is sent to the server ("-" means standard output).
var pathFlags = map[string]bool{"out": true, "html": true}

// besideAllowed is the server's beside.AllowFunc.
func besideAllowed(args []string) (refresh, ok bool) {
	_, _, refresh, ok = besideCommand(args)
	return refresh, ok
}

// besideCommand finds the command args name (with the arguments left after
// its name) and reports whether it may change the server's memory and
// whether it runs beside a server.
func besideCommand(args []string) (c *cobra.Command, rest []string, refresh, ok bool) {
	c, rest, err := newRoot().Find(args)
	if err != nil || c == nil {
		return nil, nil, false, false
	}
	refresh, ok = besideServer[c.CommandPath()]
	return c, rest, refresh, ok
}

// forward sends the command line args to the server that serves its
// project, if one runs, prints what the server's run of it printed, and
// returns its exit code. ok is false when args should run here: not a
// command that runs beside a server, no server, a stale serve.json, or
// arguments that do not parse (the run here reports them).
func forward(args []string, stdout, stderr io.Writer) (code int, ok bool) {
	c, rest, _, allowed := besideCommand(args)
	if !allowed {
		return 0, false
	}
	if err := c.ParseFlags(rest); err != nil {
		return 0, false
	}
	pos := c.Flags().Args()
	if len(pos) == 0 {
		return 0, false
	}
	dir := pos[0]
	rec, found := beside.ReadRecord(dir)
	if !found && c.Name() == "status" {
		// A workspace whose projects a server serves: the server runs the
		// whole status (it opens the other projects itself).
		if names, err := round.WorkspaceProjects(dir); err == nil {
			for _, n := range names {
				if rec, found = beside.ReadRecord(filepath.Join(dir, n)); found {
					break
				}
			}
		}
	}
	if !found {
		return 0, false
	}
	// The command line again, with DIR and files made absolute; what the
	// server prints with those is mapped back to the names as typed.
	fwd := strings.Fields(strings.TrimPrefix(c.CommandPath(), "loop "))
	var paths beside.Paths
	simple := true
	c.Flags().Visit(func(f *pflag.Flag) {
		switch f.Value.Type() {
		case "string", "bool", "int", "int64", "uint64", "float64", "duration":
		default:
			simple = false
		}
		v := f.Value.String()
		if pathFlags[f.Name] {
			v = paths.Abs(v)
		}
		fwd = append(fwd, "--"+f.Name+"="+v)
	})
	if !simple {
		return 0, false
	}
	fwd = append(fwd, "--")
	for i, p := range pos {
		if i == 0 {
			p = paths.Abs(p)
		}
		fwd = append(fwd, p)
	}
	reply, err := beside.Send(rec, fwd)
	if err != nil {
		return 0, false // nothing answers: a stale serve.json
	}
	io.WriteString(stdout, paths.Unmap(reply.Stdout))
	io.WriteString(stderr, paths.Unmap(reply.Stderr))
	return reply.Code, true
}

// besideError is the error of a command that cannot run beside the server
// that serves dir, or nil when no server answers there (openStore then
// opens the store as usual, and waits for the file lock).
func besideError(dir string) error {
	if rec, ok := beside.ReadRecord(dir); ok && beside.Serving(rec) {
		return inUse(dir, store.ErrInUse)
	}
	return nil
}

// inUse turns store.Open's "in use" error into one that says which server
// holds the project and what to do.
func inUse(dir string, err error) error {
	if !errors.Is(err, store.ErrInUse) {
		return err
	}
	var names []string
	for k := range besideServer {
		names = append(names, strings.TrimPrefix(k, "loop "))
	}
	sort.Strings(names)
	if rec, ok := beside.ReadRecord(dir); ok {
		return fmt.Errorf("%s is being served by `loop serve` (process %d, %s): this command cannot run beside it; "+
			"stop the server first (Ctrl-C), or use the board or the API (items, labels and gold can be imported through "+
			"POST /api/v1/items, /api/v1/labels/import, /api/v1/gold; rounds run from the board). These commands run beside "+
			"a server: %s", dir, rec.PID, rec.Serves, strings.Join(names, ", "))
	}
	return err
}
