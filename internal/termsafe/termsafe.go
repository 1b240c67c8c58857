// Package termsafe shows the control characters of what is written to a
// terminal instead of letting the terminal obey them.
package termsafe

import (
	"fmt"
	"io"
	"os"
	"unicode/utf8"

	"golang.org/x/term"
)

// writer writes to a terminal with its control characters shown, not
// obeyed: C0 controls but newline and tab, DEL, C1 controls and the
// Unicode characters that reorder text (U+202A–U+202E, U+2066–U+2069)
// become \xNN or \u escapes. Ids and texts in a project are data; an id
// holding an escape sequence must not move the cursor, change colours or
// forge lines. (The readers refuse such ids; projects made before may hold
// them.) Output that goes to a file or a pipe is not changed.
type writer struct{ f *os.File }

// Fd lets callers see the terminal behind (to size progress bars).
func (w writer) Fd() uintptr { return w.f.Fd() }

// Write writes p with its control characters escaped and returns len(p).
func (w writer) Write(p []byte) (int, error) {
	if _, err := w.f.Write(escapeControls(p)); err != nil {
		return 0, err
	}
	return len(p), nil
}

// escapeControls returns p with its control characters escaped (see
// writer); p itself if it has none.
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

// Out returns f, wrapped so that its control characters are escaped when
// it is a terminal; a file or a pipe gets the bytes unchanged.
func Out(f *os.File) io.Writer {
	if term.IsTerminal(int(f.Fd())) {
		return writer{f}
	}
	return f
}
