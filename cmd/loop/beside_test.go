package main

import (
	"bufio"
	"bytes"
	"encoding/json"
	"fmt"
	"io"
	"net/http"
	"os"
	"os/exec"
	"path/filepath"
	"regexp"
	"strings"
	"syscall"
	"testing"
	"time"

	"handoff/ingest"
	"handoff/internal/testproject"
)

// serveProcess is a `loop serve` subprocess.
type serveProcess struct {
	cmd    *exec.Cmd
	base   string
	stderr *bytes.Buffer
}

func startServe(t *testing.T, bin, dir string) *serveProcess {
	t.Helper()
	cmd := exec.Command(bin, "serve", dir, "--addr", "127.0.0.1:0", "--practice", "0", "--check", "0")
	out, err := cmd.StdoutPipe()
	if err != nil {
		t.Fatal(err)
	}
	p := &serveProcess{cmd: cmd, stderr: &bytes.Buffer{}}
	cmd.Stderr = p.stderr
	if err := cmd.Start(); err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() { cmd.Process.Kill(); cmd.Wait() })
	sc := bufio.NewScanner(out)
	if !sc.Scan() {
		cmd.Wait()
		t.Fatalf("loop serve printed nothing; stderr: %s", p.stderr)
	}
	go io.Copy(io.Discard, out)
	line := sc.Text()
	i := strings.Index(line, "http://")
	if i < 0 {
		t.Fatalf("no address in %q", line)
	}
	p.base, _, _ = strings.Cut(line[i:], " ")
	return p
}

func (p *serveProcess) stop(t *testing.T) {
	t.Helper()
	p.cmd.Process.Signal(syscall.SIGTERM)
	if err := p.cmd.Wait(); err != nil {
		t.Errorf("loop serve after SIGTERM: %v; stderr: %s", err, p.stderr)
	}
}

// get sends a GET with a bearer token and returns the status.
func get(t *testing.T, url, token string) int {
	t.Helper()
	req, _ := http.NewRequest("GET", url, nil)
	req.Header.Set("Authorization", "Bearer "+token)
	resp, err := http.DefaultClient.Do(req)
	if err != nil {
		t.Fatal(err)
	}
	resp.Body.Close()
	return resp.StatusCode
}

// TestBesideServer runs the read commands and people management while a
// real `loop serve` process holds the project: each prints exactly what it
// prints without a server (the server runs it), files named relative to
// the caller's folder land there, people added beside the server can sign
// in at once and revoked tokens are refused at once, commands that must
// not run beside a server say so quickly, and serve.json is removed on a
// clean stop and ignored when a killed server left it behind.
func TestBesideServer(t *testing.T) {
	if testing.Short() {
		t.Skip("builds loop and runs a server")
	}
	bin := testproject.BuildLoop(t)
	root, _ := filepath.Abs("../..")
	work := t.TempDir()
	t.Chdir(work)
	proj := "patients" // relative, as typed
	mustLoop(t, "init", proj, "--codebook", filepath.Join(root, "testdata/ingest/ds1979_codebook.yaml"))
	mustLoop(t, "items", "add", proj, filepath.Join(root, "testdata/ingest/ds1979_items.csv"))
	mustLoop(t, "labels", "add", proj, filepath.Join(root, "testdata/ds1979.csv"))
	lead := strings.TrimSpace(mustLoop(t, "people", "add", proj, "lead", "--admin", "--quiet"))

	// Each command, first without a server. Commands that fail (no round
	// yet) must fail the same way beside the server.
	mustLoop(t, "consensus", proj) // stored before the runs compared below
	cmds := [][]string{
		{"status", proj}, {"status", proj, "--json"}, {"status", "."},
		{"consensus", proj, "--keep-repeats", "--no-cleaning"}, {"consensus", proj},
		{"agreement", proj}, {"agreement", proj, "--json"},
		{"export", proj, "--format", "csv"}, {"export", proj, "--out", "labels.csv"}, {"export", proj, "--out=sub/../labels2.csv", "--format=jsonl"},
		{"rollup", proj}, {"verdict", proj}, {"next", proj, "--n", "5"},
		{"people", "list", proj}, {"status", proj, "--quiet"},
	}
	type result struct {
		code        int
		out, errs   string
		file, file2 string
	}
	read := func(name string) string { b, _ := os.ReadFile(name); return string(b) }
	runAll := func() []result {
		var rs []result
		for _, c := range cmds {
			os.Remove("labels.csv")
			os.Remove("labels2.csv")
			code, out, errs := loop(t, c...)
			// The audit trail grows with each run that writes (consensus,
			// exports): its length is not part of the comparison.
			out = auditCount.ReplaceAllString(out, `"audit_entries": N`)
			rs = append(rs, result{code, out, errs, read("labels.csv"), read("labels2.csv")})
		}
		return rs
	}
	os.MkdirAll("sub", 0o755)
	before := runAll()

	srv := startServe(t, bin, proj)
	info, err := os.Stat(filepath.Join(proj, "serve.json"))
	if err != nil || info.Mode().Perm() != 0o600 {
		t.Fatalf("serve.json: %v %v", info, err)
	}
	beside := runAll()
	for i, c := range cmds {
		b, a := before[i], beside[i]
		if a != b {
			t.Errorf("loop %s beside the server:\n got exit %d, stdout %q, stderr %q, file %d bytes, %d bytes\nwant exit %d, stdout %q, stderr %q, file %d bytes, %d bytes",
				strings.Join(c, " "), a.code, trim(a.out), trim(a.errs), len(a.file), len(a.file2), b.code, trim(b.out), trim(b.errs), len(b.file), len(b.file2))
		}
	}
	if !strings.Contains(before[8].errs, "exported 45 items to labels.csv") || len(before[8].file) == 0 {
		t.Errorf("export --out: %+v", before[8])
	}

	// People management beside the server.
	code, tok, errs := loop(t, "people", "add", proj, "coder07", "--quiet")
	tok = strings.TrimSpace(tok)
	if code != 0 || errs != "" || !strings.Contains(tok, ".") {
		t.Fatalf("people add beside the server: %d %q %q", code, tok, errs)
	}
	if s := get(t, srv.base+"/api/v1/me", tok); s != http.StatusOK {
		t.Errorf("the token added beside the server: %d", s)
	}
	code, tok2, _ := loop(t, "people", "token", proj, "coder07")
	tok2 = strings.TrimSpace(tok2)
	if s := get(t, srv.base+"/api/v1/me", tok2); code != 0 || s != http.StatusOK {
		t.Errorf("a second token issued beside the server: %d %d", code, s)
	}
	out := mustLoop(t, "people", "revoke", proj, strings.SplitN(tok, ".", 2)[0])
	if !strings.Contains(out, "revoked a token of coder07") {
		t.Errorf("revoke: %q", out)
	}
	if s := get(t, srv.base+"/api/v1/me", tok); s != http.StatusUnauthorized {
		t.Errorf("a token revoked beside the server still works: %d", s)
	}
	if s := get(t, srv.base+"/api/v1/me", tok2); s != http.StatusOK {
		t.Errorf("the person's other token stopped working: %d", s)
	}
	if out := mustLoop(t, "people", "revoke", proj, "--person", "coder07"); !strings.Contains(out, "revoked 1 token(s) of coder07") {
		t.Errorf("revoke --person: %q", out)
	}
	if s := get(t, srv.base+"/api/v1/me", tok2); s != http.StatusUnauthorized {
		t.Errorf("after revoke --person: %d", s)
	}
	if list := mustLoop(t, "people", "list", proj); !strings.Contains(list, "coder07") || !strings.Contains(list, "no tokens (revoked)") {
		t.Errorf("people list: %s", list)
	}
	if s := get(t, srv.base+"/api/v1/status", lead); s != http.StatusOK {
		t.Errorf("the admin's token: %d", s)
	}

	// A command that must not run beside the server says so, at once.
	t0 := time.Now()
	code, _, errs = loop(t, "labels", "add", proj, filepath.Join(root, "testdata/ds1979.csv"))
	if code != 1 || !strings.Contains(errs, "is being served by `loop serve`") || !strings.Contains(errs, "/api/v1/labels/import") {
		t.Errorf("labels add beside the server: %d %s", code, errs)
	}
	if d := time.Since(t0); d > 2*time.Second {
		t.Errorf("the refusal took %s", d)
	}
	// A second server on the same project is refused the same way.
	if out, err := exec.Command(bin, "serve", proj, "--addr", "127.0.0.1:0").CombinedOutput(); err == nil || !strings.Contains(string(out), "is being served") {
		t.Errorf("a second server: %v %s", err, out)
	}

	srv.stop(t)
	if _, err := os.Stat(filepath.Join(proj, "serve.json")); !os.IsNotExist(err) {
		t.Errorf("serve.json after a clean stop: %v", err)
	}
	// A killed server leaves serve.json behind; commands see it is stale.
	srv = startServe(t, bin, proj)
	srv.cmd.Process.Signal(syscall.SIGKILL)
	srv.cmd.Wait()
	if _, err := os.Stat(filepath.Join(proj, "serve.json")); err != nil {
		t.Fatalf("serve.json after SIGKILL: %v", err)
	}
	code, out, errs = loop(t, "status", proj)
	if code != 0 || !strings.Contains(out, "labels: 315 on 45 items") {
		t.Errorf("status after a killed server: %d %q %q", code, out, errs)
	}
	if out := mustLoop(t, "labels", "add", proj, write(t, work, "late.csv", "item,annotator,label\npatient01,late,1\n")); !strings.Contains(out, "1 added") {
		t.Errorf("labels add after a killed server: %q", out)
	}
}

var auditCount = regexp.MustCompile(`"audit_entries": \d+`)

func trim(s string) string {
	if len(s) > 300 {
		return s[:300] + "…"
	}
	return s
}

// TestInitHelp checks that the codebook in `loop init --help` loads (its
// description with commas is quoted), and that the unquoted form fails with
// a message in plain words, naming the line and saying to quote.
func TestInitHelp(t *testing.T) {
	ex := newInitCmd().Example
	start := strings.Index(ex, "<<'END'\n")
	end := strings.Index(ex, "\n  END")
	if start < 0 || end < 0 {
		t.Fatalf("no codebook in the example:\n%s", ex)
	}
	var yaml strings.Builder
	for _, l := range strings.Split(ex[start+len("<<'END'\n"):end], "\n") {
		yaml.WriteString(strings.TrimPrefix(l, "  ") + "\n")
	}
	cb, err := ingest.ParseCodebook("codebook.yaml", []byte(yaml.String()))
	if err != nil || len(cb.Classes) != 3 || cb.Classes[0].Description != "oil, foam, discoloured water" {
		t.Fatalf("the example codebook: %+v %v", cb, err)
	}
	dir := t.TempDir()
	p := write(t, dir, "codebook.yaml", yaml.String())
	code, out, errs := loop(t, "init", filepath.Join(dir, "proj"), "--codebook", p)
	if code != 0 || !strings.HasPrefix(out, "created project ") || errs != "" {
		t.Errorf("init: exit %d, stdout %q, stderr %q (the result goes to stdout)", code, out, errs)
	}
	unquoted := strings.Replace(yaml.String(), `"oil, foam, discoloured water"`, "oil, foam, discoloured water", 1)
	p = write(t, dir, "unquoted.yaml", unquoted)
	code, _, errs = loop(t, "init", filepath.Join(dir, "p2"), "--codebook", p)
	if code != 1 || !strings.Contains(errs, "unquoted.yaml:4: unknown field \"foam\"") || !strings.Contains(errs, "in quotes") || strings.Contains(errs, "handoff.") {
		t.Errorf("the unquoted example: exit %d: %s", code, errs)
	}
}

// TestInitClassLimit refuses at init a codebook with more classes than the
// analysis supports, with the limit in the message.
func TestInitClassLimit(t *testing.T) {
	dir := t.TempDir()
	cb := func(n int) string {
		var b strings.Builder
		b.WriteString("question: Which?\nclasses:\n")
		for i := range n {
			fmt.Fprintf(&b, "  - key: c%d\n", i)
		}
		return b.String()
	}
	code, _, errs := loop(t, "init", filepath.Join(dir, "big"), "--codebook", write(t, dir, "big.yaml", cb(256)))
	if code != 1 || !strings.Contains(errs, "256 classes; at most 255 are supported") {
		t.Errorf("256 classes: exit %d: %s", code, errs)
	}
	if _, err := os.Stat(filepath.Join(dir, "big")); !os.IsNotExist(err) {
		t.Errorf("a refused init left %s behind", filepath.Join(dir, "big"))
	}
	code, _, errs = loop(t, "init", filepath.Join(dir, "ok"), "--codebook", write(t, dir, "ok.yaml", cb(255)))
	if code != 0 {
		t.Errorf("255 classes: exit %d: %s", code, errs)
	}
	big := map[string]any{"question": "Which?", "classes": []map[string]string{}}
	for i := range 70000 {
		big["classes"] = append(big["classes"].([]map[string]string), map[string]string{"key": fmt.Sprint(i)})
	}
	b, _ := json.Marshal(big)
	code, _, errs = loop(t, "init", filepath.Join(dir, "huge"), "--codebook", write(t, dir, "huge.json", string(b)))
	if code != 1 || !strings.Contains(errs, "70000 classes; at most 255") {
		t.Errorf("70,000 classes: exit %d: %.200s", code, errs)
	}
}

// TestEmptyFilesRefused: item, label and gold files with no records are
// refused with exit 1 and a message naming the file; nothing changes.
func TestEmptyFilesRefused(t *testing.T) {
	proj, dir := newProject(t)
	before := mustLoop(t, "status", proj, "--json")
	for _, c := range []struct {
		args []string
		want string
	}{
		{[]string{"items", "add", proj, write(t, dir, "e.csv", "id,text\n")}, "e.csv: no items in the file"},
		{[]string{"items", "add", proj, write(t, dir, "e.jsonl", "\n")}, "e.jsonl: no items in the file"},
		{[]string{"labels", "add", proj, write(t, dir, "l.csv", "item,annotator,label\n")}, "l.csv: no labels in the file"},
		{[]string{"labels", "add", proj, write(t, dir, "g.csv", "item,label\n"), "--gold"}, "g.csv: no gold answers in the file"},
		{[]string{"items", "add", proj, write(t, dir, "i.txt", "# no images\n")}, "i.txt: no image paths in the file"},
	} {
		code, _, errs := loop(t, c.args...)
		if code != 1 || !strings.Contains(errs, c.want) {
			t.Errorf("loop %v: exit %d: %s", c.args[:2], code, errs)
		}
	}
	if after := mustLoop(t, "status", proj, "--json"); after != before {
		t.Error("a refused empty file changed the project")
	}
}

// TestTrainSaysParents: the cross-validation line says "parents kept
// together" only when items have parents.
func TestTrainSaysParents(t *testing.T) {
	words := [][]string{{"oil", "slick", "foam", "sheen"}, {"heron", "otter", "duck", "kingfisher"}, {"meeting", "bins", "signs", "parking"}}
	for _, withParents := range []bool{false, true} {
		dir := t.TempDir()
		proj := filepath.Join(dir, "proj")
		mustLoop(t, "init", proj, "--codebook", write(t, dir, "cb.yaml", codebookYAML))
		var items, labels strings.Builder
		items.WriteString("id,text,parent\n")
		labels.WriteString("item,annotator,label\n")
		for i := 0; i < 60; i++ {
			c := i % 3
			parent := ""
			if withParents {
				parent = fmt.Sprintf("doc%d", i/4)
			}
			fmt.Fprintf(&items, "i%02d,%s %s near %d,%s\n", i, words[c][i%4], words[c][(i+1)%4], i, parent)
			for _, a := range []string{"ann", "bob"} {
				fmt.Fprintf(&labels, "i%02d,%s,%s\n", i, a, []string{"pollution", "wildlife", "other"}[c])
			}
		}
		mustLoop(t, "items", "add", proj, write(t, dir, "items.csv", items.String()))
		mustLoop(t, "labels", "add", proj, write(t, dir, "labels.csv", labels.String()))
		mustLoop(t, "consensus", proj)
		out := mustLoop(t, "train", proj)
		if got := strings.Contains(out, "parents kept together"); got != withParents {
			t.Errorf("items with parents %v: %q", withParents, out)
		}
	}
}
