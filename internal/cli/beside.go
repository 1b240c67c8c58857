package cli

import (
	"errors"
	"fmt"
	"io"
	"sort"
	"strings"

	"github.com/spf13/cobra"
	"github.com/spf13/pflag"

	"handoff/internal/beside"
	"handoff/store"
)

// Beside says which commands of a command tree run beside a running
// `loop serve` (they are sent to the server of their project and print what
// its run printed) and how to find that server.
type Beside struct {
	// Commands maps a command path ("loop status") to whether it may change
	// what the server keeps in memory (the server then reads it again).
	Commands map[string]bool
	// PathFlags are the flags that name files, made absolute before a
	// command is sent ("-" means standard output).
	PathFlags map[string]bool
	// Root builds the command tree.
	Root func() *cobra.Command
	// Record finds the server of command c's project dir.
	Record func(c *cobra.Command, dir string) (beside.Record, bool)
}

// Allowed is the server's beside.AllowFunc.
func (b Beside) Allowed(args []string) (refresh, ok bool) {
	_, _, refresh, ok = b.command(args)
	return refresh, ok
}

// command finds the command args name (with the arguments left after
// its name) and reports whether it may change the server's memory and
// whether it runs beside a server.
func (b Beside) command(args []string) (c *cobra.Command, rest []string, refresh, ok bool) {
	c, rest, err := b.Root().Find(args)
	if err != nil || c == nil {
		return nil, nil, false, false
	}
	refresh, ok = b.Commands[c.CommandPath()]
	return c, rest, refresh, ok
}

// Forward sends the command line args to the server that serves its
// project, if one runs, prints what the server's run of it printed, and
// returns its exit code. ok is false when args should run here: not a
// command that runs beside a server, no server, a stale serve.json, or
// arguments that do not parse (the run here reports them).
func (b Beside) Forward(args []string, stdout, stderr io.Writer) (code int, ok bool) {
	c, rest, _, allowed := b.command(args)
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
	rec, found := b.Record(c, pos[0])
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
		if b.PathFlags[f.Name] {
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

// Error is the error of a command that cannot run beside the server
// that serves dir, or nil when no server answers there (openStore then
// opens the store as usual, and waits for the file lock).
func (b Beside) Error(dir string) error {
	if rec, ok := beside.ReadRecord(dir); ok && beside.Serving(rec) {
		return b.InUse(dir, store.ErrInUse)
	}
	return nil
}

// InUse turns store.Open's "in use" error into one that says which server
// holds the project and what to do.
func (b Beside) InUse(dir string, err error) error {
	if !errors.Is(err, store.ErrInUse) {
		return err
	}
	var names []string
	for k := range b.Commands {
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
