package main

// Commands beside a running server (package beside does the work): the
// read and people commands listed in besideServer are sent to the server
// of their project, if one runs, and print what its run printed; others
// fail with a message that says so and what to do instead.

import (
	"path/filepath"

	"github.com/spf13/cobra"

	"handoff/internal/beside"
	"handoff/internal/cli"
	"handoff/round"
)

// besideServer lists the commands that run beside a server, by command
// path, and whether they may change what the server keeps in memory (then
// the server reads it again afterwards); --out and --html name files.
var besideServer = cli.Beside{Root: newRoot, Record: serverOf, PathFlags: map[string]bool{"out": true, "html": true},
	Commands: map[string]bool{
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
	}}

// serverOf finds the server of a command's project dir: the one that
// serves dir, or, for status on a workspace, the one serving any of its
// projects (it runs the whole status, opening the other projects itself).
func serverOf(c *cobra.Command, dir string) (beside.Record, bool) {
	rec, found := beside.ReadRecord(dir)
	if !found && c.Name() == "status" {
		if names, err := round.WorkspaceProjects(dir); err == nil {
			for _, n := range names {
				if rec, found = beside.ReadRecord(filepath.Join(dir, n)); found {
					break
				}
			}
		}
	}
	return rec, found
}
