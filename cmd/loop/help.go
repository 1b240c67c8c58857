package main

import (
	"embed"
	"strings"
)

// The long help of each command and its examples live in help/NAME.txt
// (NAME is the command, or GROUP-COMMAND for a subcommand): the long text,
// then, after a line "--- examples", the examples. Keeping them as text
// keeps the command files to flags and calls, and lets the help be edited
// as prose.
//
//go:embed help/*.txt
var helpFiles embed.FS

const examplesMark = "--- examples\n"

// helpText returns part 0 (long help) or 1 (examples) of help/name.txt. A
// missing file is a programming error, caught by every test that builds
// the command tree.
func helpText(name string, part int) string {
	b, err := helpFiles.ReadFile("help/" + name + ".txt")
	if err != nil {
		panic("cmd/loop: no help text help/" + name + ".txt")
	}
	long, ex, _ := strings.Cut(string(b), examplesMark)
	return strings.TrimSuffix([]string{long, ex}[part], "\n")
}

func helpLong(name string) string    { return helpText(name, 0) }
func helpExample(name string) string { return helpText(name, 1) }
