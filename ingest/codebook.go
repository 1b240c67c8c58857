package ingest

import (
	"bytes"
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
	dec := yaml.NewDecoder(bytes.NewReader(data))
	dec.KnownFields(true)
	if err := dec.Decode(&cb); err != nil {
		if errors.Is(err, io.EOF) {
			return cb, errf(Location{File: name}, "", "empty codebook")
		}
		return cb, yamlError(name, err)
	}
	var node yaml.Node
	if err := yaml.Unmarshal(data, &node); err != nil {
		return cb, yamlError(name, err)
	}
	if err := cb.Validate(); err != nil {
		field, msg := splitField(err.Error())
		return cb, &Error{File: name, Line: lineOf(&node, field), Field: field, Err: errors.New(msg)}
	}
	if cb.IsOrdinal() {
		prev, allNum := 0.0, true
		vals := make([]float64, len(cb.Classes))
		for i, c := range cb.Classes {
			v, err := strconv.ParseFloat(c.Key, 64)
			if err != nil {
				allNum = false
				break
			}
			vals[i] = v
		}
		for i := range vals {
			if !allNum {
				break
			}
			if i > 0 && vals[i] <= prev {
				field := fmt.Sprintf("classes[%d].key", i)
				return cb, errf(Location{File: name, Line: lineOf(&node, field)}, field,
					"ordinal classes must be listed lowest first: %q comes after %q", cb.Classes[i].Key, cb.Classes[i-1].Key)
			}
			prev = vals[i]
		}
	}
	return cb, nil
}

func yamlError(name string, err error) error {
	msg := err.Error()
	var te *yaml.TypeError
	if errors.As(err, &te) && len(te.Errors) > 0 {
		msg = te.Errors[0]
	}
	msg = strings.TrimPrefix(msg, "yaml: ")
	if m := yamlLine.FindStringSubmatch(msg); m != nil {
		line, _ := strconv.Atoi(m[1])
		return &Error{File: name, Line: line, Err: errors.New(m[2])}
	}
	return &Error{File: name, Err: errors.New(msg)}
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
