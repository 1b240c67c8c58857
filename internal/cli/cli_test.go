package cli

import (
	"bytes"
	"errors"
	"strings"
	"testing"

	"github.com/spf13/cobra"
)

func TestExitCode(t *testing.T) {
	for _, tc := range []struct {
		name string
		err  error
		code int
		want string
	}{
		{"none", nil, 0, ""},
		{"usage", Usagef("--n %q: want a number", "x"), 2, "loop: --n \"x\": want a number\nRun `loop --help`"},
		{"runtime", &runtimeError{errors.New("disk full")}, 1, "loop: disk full\n"},
		{"cobra", errors.New("unknown flag: --nope"), 2, "unknown flag: --nope\nRun"},
	} {
		var b bytes.Buffer
		if got := ExitCode(tc.err, &b); got != tc.code || !strings.Contains(b.String(), tc.want) {
			t.Errorf("%s: exit %d, printed %q; want %d with %q", tc.name, got, b.String(), tc.code, tc.want)
		}
	}
}

func TestMarkRuntimeErrors(t *testing.T) {
	root := &cobra.Command{Use: "loop"}
	root.AddCommand(&cobra.Command{Use: "bad", RunE: func(*cobra.Command, []string) error { return errors.New("boom") }},
		&cobra.Command{Use: "misuse", RunE: func(*cobra.Command, []string) error { return Usagef("want DIR") }})
	MarkRuntimeErrors(root)
	for _, tc := range []struct {
		arg  string
		code int
	}{{"bad", 1}, {"misuse", 2}} {
		root.SetArgs([]string{tc.arg})
		root.SilenceErrors, root.SilenceUsage = true, true
		if got := ExitCode(root.Execute(), &bytes.Buffer{}); got != tc.code {
			t.Errorf("%s: exit %d, want %d", tc.arg, got, tc.code)
		}
	}
}

func TestOverrides(t *testing.T) {
	for _, tc := range []struct {
		args    []string
		want    string // key=value, ...
		usageOK bool
	}{
		{[]string{"--max-error", "0.03", "-n", "50"}, "max-error=0.03 batch=50", true},
		{[]string{"--no-cleaning"}, "cleaning=off", true},
		{[]string{"--max-error", "2"}, "", false}, // out of range: a usage error
	} {
		c := &cobra.Command{Use: "x"}
		BindSettings(c)
		if err := c.ParseFlags(tc.args); err != nil {
			t.Fatal(err)
		}
		over, err := Overrides(c)
		var u *usageError
		if !tc.usageOK {
			if !errors.As(err, &u) || !strings.Contains(err.Error(), "--max-error") {
				t.Errorf("%v: error %v, want a usage error naming the flag", tc.args, err)
			}
			continue
		}
		var got []string
		for _, o := range over {
			got = append(got, o.Key+"="+o.Value)
		}
		if err != nil || strings.Join(got, " ") != tc.want {
			t.Errorf("%v: %v %v, want %s", tc.args, got, err, tc.want)
		}
	}
}
