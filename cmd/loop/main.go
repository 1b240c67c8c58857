// Command loop turns noisy crowd labels into consensus, trains a classifier on
// it, sends the items the machine is unsure of back to people and decides when
// the machine may label the rest of the archive.
//
// Each command lives in its own file, cmd_NAME.go, registered from init
// with register or registerUnder; it parses its flags, opens the store,
// calls one package function and prints (DEVELOPERS.md, "Adding a
// command"). Exit codes: 0 ok, 1 runtime error (bad data, I/O), 2 usage
// error.
package main

import (
	"context"
	"io"
	"os"
	"slices"
	"strings"

	"github.com/spf13/cobra"

	"handoff/internal/cli"
	"handoff/internal/termsafe"
)

func main() { os.Exit(run(os.Args[1:], termsafe.Out(os.Stdout), os.Stderr)) }

// commands holds the constructors of the top-level commands, in registration
// order; subcommands maps a group name ("items", "labels") to its children.
var (
	commands    []func() *cobra.Command
	subcommands = map[string][]func() *cobra.Command{}
	groupShort  = map[string]string{
		"items":     "Add items (texts or images) to a project",
		"labels":    "Add crowd labels or gold answers to a project",
		"reference": "Add or list independent (expert) codings to compare with",
		"codebook":  "Change a project's codebook: add a follow-up question",
	}
)

// register adds a top-level command. Call it from an init function.
func register(f func() *cobra.Command) { commands = append(commands, f) }

// registerUnder adds a subcommand to the group named parent ("items",
// "labels", or a new group, which is then created). Call it from init.
func registerUnder(parent string, f func() *cobra.Command) {
	subcommands[parent] = append(subcommands[parent], f)
}

// newRoot builds the whole command tree.
func newRoot() *cobra.Command {
	root := &cobra.Command{
		Use:           "loop",
		Short:         "Turn crowd labels into consensus, train a classifier, decide when it may take over",
		Long:          helpLong("loop"),
		Example:       helpExample("loop"),
		SilenceErrors: true,
		SilenceUsage:  true,
	}
	root.PersistentFlags().Bool("quiet", false, "print nothing but results and errors; no progress bars")
	root.CompletionOptions.DisableDefaultCmd = true
	groups := map[string]*cobra.Command{}
	names := make([]string, 0, len(subcommands))
	for name := range subcommands {
		names = append(names, name)
	}
	slices.Sort(names)
	for _, name := range names {
		g := newGroup(name)
		groups[name] = g
		for _, f := range subcommands[name] {
			g.AddCommand(f())
		}
		root.AddCommand(g)
	}
	for _, f := range commands {
		root.AddCommand(f())
	}
	cli.MarkRuntimeErrors(root)
	fillGroupExamples(root)
	return root
}

// fillGroupExamples gives a command that groups subcommands and has no
// Example of its own the examples of its subcommands.
func fillGroupExamples(c *cobra.Command) {
	var examples []string
	for _, sub := range c.Commands() {
		fillGroupExamples(sub)
		if sub.Example != "" {
			examples = append(examples, sub.Example)
		}
	}
	if c.Example == "" && len(examples) > 0 {
		c.Example = strings.Join(examples, "\n")
	}
}

func newGroup(name string) *cobra.Command {
	short := groupShort[name]
	if short == "" {
		short = "Commands about " + name
	}
	return &cobra.Command{
		Use:   name,
		Short: short,
		Args:  cobra.NoArgs,
		RunE: func(cmd *cobra.Command, args []string) error {
			return cli.Usagef("%s needs a subcommand; see `%s --help`", cmd.CommandPath(), cmd.CommandPath())
		},
	}
}

// run executes loop with args, writing to stdout and stderr, and returns the
// exit code. A command that runs beside a server is sent to the server of
// its project if one runs (forward, in beside.go).
func run(args []string, stdout, stderr io.Writer) int {
	if code, ok := besideServer.Forward(args, stdout, stderr); ok {
		return code
	}
	return runIn(context.Background(), args, stdout, stderr)
}

// runIn executes loop with args in this process.
func runIn(ctx context.Context, args []string, stdout, stderr io.Writer) int {
	root := newRoot()
	root.SetArgs(args)
	root.SetOut(stdout)
	root.SetErr(stderr)
	return cli.ExitCode(root.ExecuteContext(cli.WithInvocation(ctx, "loop "+strings.Join(args, " "))), stderr)
}
