package termsafe

import "testing"

// TestEscapeControls: what a terminal would obey is shown as an escape.
func TestEscapeControls(t *testing.T) {
	cases := []struct{ in, want string }{
		{"plain text\n\tindented\n", "plain text\n\tindented\n"},
		{"ann\x1b[2Jx", `ann\x1b[2Jx`},
		{"a\rb", `a\x0db`},
		{"nul\x00", `nul\x00`},
		{"del\x7f", `del\x7f`},
		{"c1\u009bx", `c1\u009bx`},
		{"left\u202eright", `left\u202eright`},
		{"café ✓", "café ✓"},
		{"bad \xff byte", "bad \xff byte"},
	}
	for _, c := range cases {
		if got := string(escapeControls([]byte(c.in))); got != c.want {
			t.Errorf("escapeControls(%q) = %q, want %q", c.in, got, c.want)
		}
	}
}
