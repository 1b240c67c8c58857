package ingest

import (
	"bytes"
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"os"
	"path/filepath"
	"regexp"
	"strconv"
	"strings"

	"go.yaml.in/yaml/v3"

	"handoff"
)

// ReadCodebook reads a codebook file in YAML or JSON (JSON is read as YAML,
// of which it is a subset); see ParseCodebook.
func ReadCodebook(path string) (handoff.Codebook, error) {
	data, err := os.ReadFile(path)
	if err != nil {
		return handoff.Codebook{}, err
	}
	return ParseCodebook(filepath.Base(path), data)
}

var yamlLine = regexp.MustCompile(`^(?:yaml: )?line (\d+): (.*)$`)

// ParseCodebook parses a codebook from data (YAML or JSON); name is the file
// name used in errors. Unknown fields are errors (a misspelt "clases" must not
// pass silently). The result is checked with handoff.Codebook.Validate, and an
// ordinal codebook whose class keys are all numbers must list them in
// increasing order (lowest first, as the Codebook rules say).
func ParseCodebook(name string, data []byte) (handoff.Codebook, error) {
	var cb handoff.Codebook
	if !isUTF8(data) {
		return cb, errf(Location{File: name}, "", "not UTF-8 text")
	}
	if t := bytes.TrimSpace(data); len(t) > 0 && t[0] == '{' {
		if err := checkJSON(name, data); err != nil {
			return cb, err
		}
	}
	dec := yaml.NewDecoder(bytes.NewReader(data))
	dec.KnownFields(true)
	if err := dec.Decode(&cb); err != nil {
		if errors.Is(err, io.EOF) {
			return cb, errf(Location{File: name}, "", "empty codebook")
		}
		return cb, yamlError(name, data, err)
	}
	var more yaml.Node
	if err := dec.Decode(&more); !errors.Is(err, io.EOF) {
		line := 0
		if err == nil {
			line = more.Line
		}
		return cb, errf(Location{File: name, Line: line}, "", "a second YAML document after the codebook (after \"---\"): a codebook file holds one")
	}
	var node yaml.Node
	if err := yaml.Unmarshal(data, &node); err != nil {
		return cb, yamlError(name, data, err)
	}
	// A tree may list every question under "questions", the first one
	// first: the first moves to the top level, where a one-question codebook
	// keeps it.
	shifted := false
	if strings.TrimSpace(cb.Question) == "" && len(cb.Classes) == 0 && cb.Key == "" && len(cb.Questions) > 0 {
		f := cb.Questions[0]
		if f.When != nil {
			return cb, errf(Location{File: name, Line: lineOf(&node, "questions[0].when")}, "questions[0].when",
				"the first question is asked of every item and cannot have a condition")
		}
		cb.Key, cb.Question, cb.Scale, cb.Classes, cb.Instructions = f.Key, f.Question, f.Scale, f.Classes, f.Instructions
		cb.Questions = cb.Questions[1:]
		if cb.Key == "" {
			return cb, errf(Location{File: name, Line: lineOf(&node, "questions[0]")}, "questions[0].key", "every question of a tree needs a key")
		}
		shifted = true
	}
	// field maps a field path of the normalised codebook to the file's.
	field := func(f string) string {
		if !shifted {
			return f
		}
		if strings.HasPrefix(f, "questions[") {
			var i int
			var rest string
			if n, _ := fmt.Sscanf(f, "questions[%d]", &i); n == 1 {
				rest = f[strings.IndexByte(f, ']')+1:]
				return fmt.Sprintf("questions[%d]%s", i+1, rest)
			}
			return f
		}
		if f == "" {
			return f
		}
		return "questions[0]." + f
	}
	if err := cb.Validate(); err != nil {
		f, msg := splitField(err.Error())
		f = field(f)
		return cb, &Error{File: name, Line: lineOf(&node, f), Field: f, Err: errors.New(msg)}
	}
	for q, x := range cb.All() {
		prefix := ""
		if q > 0 {
			prefix = fmt.Sprintf("questions[%d].", q-1)
		}
		if i := misordered(x); i > 0 {
			f := field(fmt.Sprintf("%sclasses[%d].key", prefix, i))
			return cb, errf(Location{File: name, Line: lineOf(&node, f)}, f,
				"ordinal classes must be listed lowest first: %q comes after %q", x.Classes[i].Key, x.Classes[i-1].Key)
		}
	}
	return cb, nil
}

// misordered returns the first class of an ordinal question whose keys are
// all numbers that is not above the one before it, or 0 when there is none.
func misordered(x handoff.Question) int {
	if x.Scale != handoff.Ordinal {
		return 0
	}
	vals := make([]float64, len(x.Classes))
	for i, c := range x.Classes {
		v, err := strconv.ParseFloat(c.Key, 64)
		if err != nil {
			return 0
		}
		vals[i] = v
	}
	for i := 1; i < len(vals); i++ {
		if vals[i] <= vals[i-1] {
			return i
		}
	}
	return 0
}

// ParseQuestion parses one follow-up question (YAML or JSON, the fields of
// an entry of a codebook's questions: key, question, scale, classes,
// instructions, when) to be added to the codebook cb, and checks the codebook
// it makes (handoff.Codebook.Validate; ordinal number keys lowest first).
// Errors name the file, line and field of the question's file.
func ParseQuestion(cb handoff.Codebook, name string, data []byte) (handoff.Question, error) {
	var q handoff.Question
	if !isUTF8(data) {
		return q, errf(Location{File: name}, "", "not UTF-8 text")
	}
	if t := bytes.TrimSpace(data); len(t) > 0 && t[0] == '{' {
		if err := checkJSON(name, data); err != nil {
			return q, err
		}
	}
	dec := yaml.NewDecoder(bytes.NewReader(data))
	dec.KnownFields(true)
	if err := dec.Decode(&q); err != nil {
		if errors.Is(err, io.EOF) {
			return q, errf(Location{File: name}, "", "empty question file")
		}
		return q, yamlError(name, data, err)
	}
	var more yaml.Node
	if err := dec.Decode(&more); !errors.Is(err, io.EOF) {
		return q, errf(Location{File: name, Line: more.Line}, "", "a second YAML document after the question (after \"---\"): the file holds one question")
	}
	var node yaml.Node
	if err := yaml.Unmarshal(data, &node); err != nil {
		return q, yamlError(name, data, err)
	}
	if q.Key == "" {
		return q, errf(Location{File: name, Line: lineOf(&node, "")}, "key", "the question needs a key (the name of its column in files and exports)")
	}
	next := cb
	next.Questions = append(append([]handoff.Question(nil), cb.Questions...), q)
	if err := next.Validate(); err != nil {
		f, msg := splitField(err.Error())
		// Fields of the new question are "questions[N].…": the file's own.
		own := fmt.Sprintf("questions[%d]", len(cb.Questions))
		if f != own && !strings.HasPrefix(f, own+".") {
			return q, &Error{File: name, Field: f, Err: fmt.Errorf("with this question the codebook breaks a rule: %s", msg)}
		}
		f = strings.TrimPrefix(strings.TrimPrefix(f, own), ".")
		return q, &Error{File: name, Line: lineOf(&node, f), Field: f, Err: errors.New(msg)}
	}
	if i := misordered(q); i > 0 {
		f := fmt.Sprintf("classes[%d].key", i)
		return q, errf(Location{File: name, Line: lineOf(&node, f)}, f,
			"ordinal classes must be listed lowest first: %q comes after %q", q.Classes[i].Key, q.Classes[i-1].Key)
	}
	return q, nil
}

// checkJSON checks that a codebook written as JSON is one well-formed JSON
// object with nothing after it (YAML, which reads the rest, would stop at
// the end of the first value and ignore what follows).
func checkJSON(name string, data []byte) error {
	dec := json.NewDecoder(bytes.NewReader(data))
	var v json.RawMessage
	if err := dec.Decode(&v); err != nil {
		var se *json.SyntaxError
		if errors.As(err, &se) {
			return errf(Location{File: name, Line: lineAt(data, se.Offset)}, "", "malformed JSON: %s", strings.TrimPrefix(se.Error(), "json: "))
		}
		return errf(Location{File: name}, "", "malformed JSON: %s", strings.TrimPrefix(err.Error(), "json: "))
	}
	off := dec.InputOffset()
	if rest := bytes.TrimSpace(data[off:]); len(rest) > 0 {
		at := off + int64(bytes.Index(data[off:], rest[:1]))
		junk := string(rest)
		if len(junk) > 20 {
			junk = junk[:20] + "…"
		}
		return errf(Location{File: name, Line: lineAt(data, at)}, "", "unexpected %q after the JSON object: a codebook file holds one object and nothing after it", junk)
	}
	return nil
}

// lineAt returns the 1-based line of byte offset off in data.
func lineAt(data []byte, off int64) int {
	if off > int64(len(data)) {
		off = int64(len(data))
	}
	return 1 + bytes.Count(data[:off], []byte("\n"))
}

// yamlTypes names, in words, the Go types the YAML decoder mentions, and
// yamlTags the YAML node kinds.
var (
	yamlTypes = map[string]string{
		"[]handoff.Class":    "a list of classes",
		"handoff.Class":      "a class (a mapping with key, name and description)",
		"handoff.Codebook":   "a codebook (a mapping with name, question, scale, classes and instructions, or questions)",
		"[]handoff.Question": "a list of questions",
		"handoff.Question":   "a question (a mapping with key, question, scale, classes, instructions and when)",
		"*handoff.Condition": "a condition (a mapping with question and in)",
		"handoff.Condition":  "a condition (a mapping with question and in)",
		"[]string":           "a list of class keys",
		"handoff.Scale":      "nominal or ordinal",
		"string":             "text",
	}
	yamlTags = map[string]string{
		"!!str": "text", "!!seq": "a list", "!!map": "a mapping", "!!int": "a number", "!!float": "a number",
		"!!bool": "true or false", "!!null": "nothing", "!!binary": "binary data", "!!timestamp": "a date",
	}
	yamlUnmarshal = regexp.MustCompile("^cannot unmarshal (!!\\w+)(?: `([^`]*)`)? into (\\S+)$")
	yamlUnknown   = regexp.MustCompile(`^field (\S+) not found in type (\S+)$`)
	knownFields   = map[string]string{
		"handoff.Class":     "key, name, description",
		"handoff.Codebook":  "name, key, question, scale, classes, instructions, questions",
		"handoff.Question":  "key, question, scale, classes, instructions, when",
		"handoff.Condition": "question, in",
	}
)

// yamlError turns a YAML decoding error into an *Error with the line and a
// message in plain words (no Go type names).
func yamlError(name string, data []byte, err error) error {
	msg := err.Error()
	var te *yaml.TypeError
	if errors.As(err, &te) && len(te.Errors) > 0 {
		msg = te.Errors[0]
	}
	msg = strings.TrimPrefix(msg, "yaml: ")
	line := 0
	if m := yamlLine.FindStringSubmatch(msg); m != nil {
		line, _ = strconv.Atoi(m[1])
		msg = m[2]
	}
	if m := yamlUnmarshal.FindStringSubmatch(msg); m != nil {
		want := yamlTypes[m[3]]
		if want == "" {
			want = "another kind of value"
		}
		found := yamlTags[m[1]]
		if found == "" {
			found = "a value"
		}
		if m[2] != "" {
			found += fmt.Sprintf(" (%q)", m[2])
		}
		msg = fmt.Sprintf("expected %s, found %s", want, found)
	} else if m := yamlUnknown.FindStringSubmatch(msg); m != nil {
		msg = fmt.Sprintf("unknown field %q", m[1])
		if k := knownFields[m[2]]; k != "" {
			msg += " (known fields: " + k + ")"
		}
		if line > 0 && strings.Contains(lineText(data, line), "{") {
			msg += `; in a {…} mapping, put a value holding commas in quotes, e.g. description: "oil, foam"`
		}
	}
	return &Error{File: name, Line: line, Err: errors.New(msg)}
}

// lineText returns line n (1-based) of data.
func lineText(data []byte, n int) string {
	lines := strings.Split(string(data), "\n")
	if n < 1 || n > len(lines) {
		return ""
	}
	return lines[n-1]
}

// splitField splits "classes[1].key: empty class key" into its field and
// message.
func splitField(s string) (string, string) {
	if i := strings.Index(s, ": "); i > 0 && !strings.Contains(s[:i], " ") {
		return s[:i], s[i+2:]
	}
	return "", s
}

// lineOf finds the line of a field path such as "question", "classes" or
// "classes[2].key" in a parsed YAML document; 0 if not found.
func lineOf(doc *yaml.Node, field string) int {
	n := doc
	if n.Kind == yaml.DocumentNode && len(n.Content) > 0 {
		n = n.Content[0]
	}
	line := n.Line
	for _, part := range strings.Split(field, ".") {
		idx := -1
		if i := strings.IndexByte(part, '['); i > 0 && strings.HasSuffix(part, "]") {
			idx, _ = strconv.Atoi(part[i+1 : len(part)-1])
			part = part[:i]
		}
		if n.Kind != yaml.MappingNode {
			return line
		}
		var next *yaml.Node
		for j := 0; j+1 < len(n.Content); j += 2 {
			if n.Content[j].Value == part {
				line = n.Content[j].Line
				next = n.Content[j+1]
			}
		}
		if next == nil {
			return line
		}
		n = next
		if idx >= 0 {
			if n.Kind != yaml.SequenceNode || idx >= len(n.Content) {
				return line
			}
			n = n.Content[idx]
			line = n.Line
		}
	}
	return line
}
