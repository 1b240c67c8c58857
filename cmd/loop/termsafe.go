package main

import (
	"fmt"
	"io"
	"os"
	"unicode/utf8"

	"golang.org/x/term"
)

// termSafe writes to a terminal with its control characters shown, not
// obeyed: C0 controls but newline and tab, DEL, C1 controls and the
// Unicode characters that reorder text (U+202A–U+202E, U+2066–U+2069)
// become \xNN or \u escapes. Ids and texts in a project are data; an id
// holding an escape sequence must not move the cursor, change colours or
// forge lines. (The readers refuse such ids; projects made before may hold
// them.) Output that goes to a file or a pipe is not changed.
type termSafe struct{ f *os.File }

// Fd lets interactive (helpers.go) see the terminal behind.
func (w termSafe) Fd() uintptr { return w.f.Fd() }

func (w termSafe) Write(p []byte) (int, error) {
	if _, err := w.f.Write(escapeControls(p)); err != nil {
		return 0, err
	}
	return len(p), nil
}

// escapeControls returns p with its control characters escaped (see
// termSafe); p itself if it has none.
func escapeControls(p []byte) []byte {
	var out []byte
	for i := 0; i < len(p); {
		r, n := utf8.DecodeRune(p[i:])
		esc := ""
		switch {
		case r == utf8.RuneError && n == 1:
			// Not UTF-8: pass the byte on unless it is a control.
			if p[i] < 0x20 && p[i] != '\n' && p[i] != '\t' || p[i] == 0x7f {
				esc = fmt.Sprintf(`\x%02x`, p[i])
			}
		case r < 0x20 && r != '\n' && r != '\t', r == 0x7f:
			esc = fmt.Sprintf(`\x%02x`, r)
		case r >= 0x80 && r <= 0x9f, r >= 0x202a && r <= 0x202e, r >= 0x2066 && r <= 0x2069:
			esc = fmt.Sprintf(`\u%04x`, r)
		}
		if esc != "" && out == nil {
			out = append(make([]byte, 0, len(p)+16), p[:i]...)
		}
		switch {
		case esc != "":
			out = append(out, esc...)
		case out != nil:
			out = append(out, p[i:i+n]...)
		}
		i += n
	}
	if out == nil {
		return p
	}
	return out
}

// terminalOut returns stdout, wrapped in termSafe when it is a terminal.
func terminalOut(f *os.File) io.Writer {
	if term.IsTerminal(int(f.Fd())) {
		return termSafe{f}
	}
	return f
}
