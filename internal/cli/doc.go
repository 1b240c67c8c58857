// Package cli is the plumbing of the loop command, shared by all its
// commands and holding no part of the job itself: exit codes (usage errors
// exit 2, runtime errors 1), what a command prints (results on stdout
// always, hints and notes unless --quiet, JSON), progress bars on stderr,
// writing an output file whole or not at all, and the settings flags that
// override one of a project's stored settings for one run.
package cli

import "context"

type ctxKey int

const invocationKey ctxKey = 0

// WithInvocation returns ctx carrying the command line as typed, which
// Source returns for the audit trail.
func WithInvocation(ctx context.Context, line string) context.Context {
	return context.WithValue(ctx, invocationKey, line)
}
