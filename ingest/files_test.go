package ingest

import (
	"errors"
	"image"
	"image/png"
	"io"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"handoff"
)

// TestFiles reads labels, gold and items from several files as one
// stream: the records come in file order, Where names the file and line of
// the record last read, every file is closed, and a bad file stops the
// stream with an error that names it.
func TestFiles(t *testing.T) {
	dir := t.TempDir()
	write := func(name, data string) string {
		p := filepath.Join(dir, name)
		if err := os.WriteFile(p, []byte(data), 0o644); err != nil {
			t.Fatal(err)
		}
		return p
	}
	a := write("a.csv", "item,annotator,label\ni1,ann,x\ni2,ann,y\n")
	b := write("b.jsonl", `{"item":"i3","annotator":"bob","label":"x"}`+"\n")
	empty := write("empty.csv", "item,annotator,label\n")
	g := write("g.csv", "item,label\ni1,x\n")
	it := write("items.csv", "id,text\nt1,one\n")
	writeImage(t, filepath.Join(dir, "img", "p.png"), func(w io.Writer, m image.Image) error { return png.Encode(w, m) })

	var opened, closed []string
	open := func(p string) (io.ReadCloser, error) {
		f, err := os.Open(p)
		opened = append(opened, filepath.Base(p))
		return closer{f, func() { closed = append(closed, filepath.Base(p)) }}, err
	}
	labels := LabelFiles([]Source{{a, CSV}, {b, JSONL}}, LabelOptions{})
	labels.Open = open
	var got []string
	var where []string
	for {
		l, err := labels.Next()
		if err == io.EOF {
			break
		}
		if err != nil {
			t.Fatal(err)
		}
		loc, _ := labels.Where()
		got = append(got, l.Item)
		where = append(where, filepath.Base(loc.File)+":"+string(rune('0'+loc.Line)))
	}
	if strings.Join(got, " ") != "i1 i2 i3" || strings.Join(where, " ") != "a.csv:2 a.csv:3 b.jsonl:1" {
		t.Errorf("labels %v at %v", got, where)
	}
	if strings.Join(opened, " ") != "a.csv b.jsonl" || strings.Join(closed, " ") != "a.csv b.jsonl" {
		t.Errorf("opened %v, closed %v", opened, closed)
	}
	if loc, ok := labels.Where(); !ok || filepath.Base(loc.File) != "b.jsonl" || loc.Line != 1 {
		t.Errorf("Where after the last file: %+v %v, want the last record's place", loc, ok)
	}

	bad := LabelFiles([]Source{{a, CSV}, {empty, CSV}}, LabelOptions{})
	var err error
	for err == nil {
		_, err = bad.Next()
	}
	if err == io.EOF || !strings.Contains(err.Error(), "empty.csv") {
		t.Errorf("an empty second file: %v, want an error naming it", err)
	}
	bad.Close()

	gold := GoldFiles([]Source{{g, CSV}}, GoldOptions{})
	if x, err := gold.Next(); err != nil || x != (handoff.Gold{Item: "i1", Class: "x", Source: "g.csv"}) {
		t.Errorf("gold %+v %v", x, err)
	}
	gold.Close()

	var ticks, dones int
	items := ItemFiles([]Source{{it, CSV}, {filepath.Join(dir, "img"), Images}}, ItemOptions{})
	items.Folder = func(path string, n int) (func(), func()) {
		if n != 1 {
			t.Errorf("folder %s of %d images, want 1", path, n)
		}
		return func() { ticks++ }, func() { dones++ }
	}
	var kinds []string
	for {
		x, err := items.Next()
		if err == io.EOF {
			break
		}
		if err != nil {
			t.Fatal(err)
		}
		kinds = append(kinds, x.ID+":"+string(x.Kind))
	}
	if strings.Join(kinds, " ") != "t1:text p.png:image" || ticks != 1 || dones != 1 {
		t.Errorf("items %v, %d ticks, %d dones", kinds, ticks, dones)
	}
}

type closer struct {
	io.ReadCloser
	after func()
}

func (c closer) Close() error { c.after(); return c.ReadCloser.Close() }

// TestSources: formats are guessed from names or given, and names that
// cannot be read as asked are refused with ErrSource, naming the file.
func TestSources(t *testing.T) {
	dir := t.TempDir()
	csvFile := filepath.Join(dir, "a.csv")
	os.WriteFile(csvFile, []byte("id,text\n"), 0o644)
	odd := filepath.Join(dir, "a.dat")
	os.WriteFile(odd, []byte("x"), 0o644)
	items := []struct {
		name   string
		paths  []string
		format Format
		split  bool
		want   Format
		errHas string
	}{
		{"guessed csv", []string{csvFile}, "", false, CSV, ""},
		{"a folder of images", []string{dir}, "", false, Images, ""},
		{"format given", []string{odd}, JSONL, false, JSONL, ""},
		{"cannot tell", []string{odd}, "", false, "", "a.dat"},
		{"folder as csv", []string{dir}, CSV, false, "", "is a folder"},
		{"split images", []string{dir}, "", true, "", "--split"},
		{"unknown format", []string{csvFile}, "xlsx", false, "", `"xlsx"`},
	}
	for _, c := range items {
		srcs, err := ItemSources(c.paths, c.format, c.split)
		switch {
		case c.errHas == "" && (err != nil || srcs[0].Format != c.want):
			t.Errorf("%s: %v %v", c.name, srcs, err)
		case c.errHas != "" && (!errors.Is(err, ErrSource) || !strings.Contains(err.Error(), c.errHas)):
			t.Errorf("%s: %v, want ErrSource naming %s", c.name, err, c.errHas)
		}
	}
	if _, err := ItemSources([]string{filepath.Join(dir, "missing.csv")}, "", false); err == nil || errors.Is(err, ErrSource) {
		t.Errorf("a missing file: %v, want its own error", err)
	}
	if s, err := LabelSources([]string{csvFile, "b.jsonl"}, ""); err != nil || s[1].Format != JSONL {
		t.Errorf("label sources %v %v", s, err)
	}
	if _, err := LabelSources([]string{odd}, ""); !errors.Is(err, ErrSource) {
		t.Errorf("labels from a.dat: %v", err)
	}
}
