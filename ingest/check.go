package ingest

import (
	"fmt"
	"strings"
	"unicode"
)

// checkID refuses identifiers (item, annotator and parent ids) that hold
// control characters (C0, DEL, C1: newlines, tabs, escape sequences) or the
// Unicode formatting characters that reorder text (U+202A–U+202E,
// U+2066–U+2069): an id is printed on terminals and in tables, where such
// characters could forge lines or colours.
func checkID(loc Location, field, v string) error {
	for i, r := range v {
		if unicode.IsControl(r) || (r >= 0x202A && r <= 0x202E) || (r >= 0x2066 && r <= 0x2069) {
			return errf(loc, field, "id %s holds the control character %U at byte %d: ids must be printable text", quoteID(v), r, i)
		}
	}
	return nil
}

// checkNUL refuses a value that holds a NUL byte (no text format we read
// has a use for one, and C-based tools downstream cut strings at it).
func checkNUL(loc Location, field, v string) error {
	if i := strings.IndexByte(v, 0); i >= 0 {
		return errf(loc, field, "holds a NUL byte (\\x00) at byte %d: remove it", i)
	}
	return nil
}

// quoteID quotes an id for a message, escaping what is not printable and
// cutting long ones.
func quoteID(v string) string {
	if len(v) > 60 {
		v = v[:60] + "…"
	}
	return fmt.Sprintf("%q", v)
}
