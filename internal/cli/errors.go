package cli

import (
	"errors"
	"fmt"
	"io"

	"github.com/spf13/cobra"
)

// MarkRuntimeErrors wraps every RunE so that its errors count as runtime
// errors (exit 1) unless they are usage errors already.
func MarkRuntimeErrors(c *cobra.Command) {
	if c.RunE != nil {
		f := c.RunE
		c.RunE = func(cmd *cobra.Command, args []string) error {
			err := f(cmd, args)
			var u *usageError
			if err == nil || errors.As(err, &u) {
				return err
			}
			return &runtimeError{err}
		}
	}
	for _, sub := range c.Commands() {
		MarkRuntimeErrors(sub)
	}
}

// usageError is a mistake in how loop was called: exit code 2.
type usageError struct{ msg string }

func (e *usageError) Error() string { return e.msg }

// Usagef returns a usage error (exit code 2).
func Usagef(format string, a ...any) error {
	return &usageError{fmt.Sprintf(format, a...)}
}

// runtimeError is a failure while doing the work: exit code 1.
type runtimeError struct{ err error }

func (e *runtimeError) Error() string { return e.err.Error() }
func (e *runtimeError) Unwrap() error { return e.err }

// ExitCode prints err (if any) to stderr the way loop does and returns the
// exit code: 0 without an error, 1 for a runtime error, 2 for anything else
// (a usage error, or cobra's own complaint about flags and arguments), then
// with a pointer to the help.
func ExitCode(err error, stderr io.Writer) int {
	if err == nil {
		return 0
	}
	var rt *runtimeError
	if errors.As(err, &rt) {
		fmt.Fprintf(stderr, "loop: %v\n", rt.err)
		return 1
	}
	fmt.Fprintf(stderr, "loop: %v\n", err)
	fmt.Fprintln(stderr, "Run `loop --help` (or `loop COMMAND --help`) for usage.")
	return 2
}
