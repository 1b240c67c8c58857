package beside

import (
	"context"
	"fmt"
	"io"
	"net/http"
	"net/http/httptest"
	"path/filepath"
	"strings"
	"testing"
)

// TestHandlerAndSend: the command channel runs an allowed command line
// sent with the secret and returns what it printed; a wrong secret and a
// command line that may not run beside the server get no run.
func TestHandlerAndSend(t *testing.T) {
	var ran []string
	refreshed := 0
	run := func(_ context.Context, args []string, stdout, stderr io.Writer) int {
		ran = append(ran, strings.Join(args, " "))
		fmt.Fprintf(stdout, "out %s\n", args[0])
		fmt.Fprintf(stderr, "err\n")
		return 3
	}
	allow := func(args []string) (bool, bool) { return args[0] == "next", args[0] != "round" }
	srv := httptest.NewServer(Handler("s3cret", allow, run, func() { refreshed++ }))
	defer srv.Close()
	rec := Record{Command: srv.URL, Secret: "s3cret"}
	cases := []struct {
		name    string
		rec     Record
		args    []string
		wantErr bool
		want    Reply
	}{
		{"allowed", rec, []string{"status", "p"}, false, Reply{Stdout: "out status\n", Stderr: "err\n", Code: 3}},
		{"refreshes", rec, []string{"next", "p"}, false, Reply{Stdout: "out next\n", Stderr: "err\n", Code: 3}},
		{"not beside", rec, []string{"round", "p"}, true, Reply{}},
		{"wrong secret", Record{Command: srv.URL, Secret: "guess"}, []string{"status", "p"}, true, Reply{}},
	}
	for _, c := range cases {
		got, err := Send(c.rec, c.args)
		if (err != nil) != c.wantErr || got != c.want {
			t.Errorf("%s: %+v, %v", c.name, got, err)
		}
	}
	if strings.Join(ran, ";") != "status p;next p" || refreshed != 1 {
		t.Errorf("ran %q, refreshed %d times", ran, refreshed)
	}
	if !Serving(rec) || Serving(Record{Command: srv.URL, Secret: "guess"}) {
		t.Error("Serving does not tell the secret from a guess")
	}
	req, _ := http.NewRequest("GET", srv.URL+"/ping", nil)
	if resp, err := http.DefaultClient.Do(req); err != nil || resp.StatusCode != http.StatusUnauthorized {
		t.Errorf("ping without a secret: %v %v", resp, err)
	}
}

// TestPaths: paths made absolute are mapped back as typed in the server's
// output, longest first, and "." leaves no prefix.
func TestPaths(t *testing.T) {
	var m Paths
	proj := m.Abs("proj")
	out := m.Abs("proj/out.csv")
	dot := m.Abs(".")
	if m.Abs("-") != "-" || m.Abs("") != "" || !filepath.IsAbs(proj) {
		t.Fatalf("Abs: %q %q", proj, m.Abs("-"))
	}
	cases := map[string]string{
		"wrote " + out:                            "wrote proj/out.csv",
		"project " + proj + " ok":                 "project proj ok",
		filepath.Join(dot, "report.html") + " ok": "report.html ok",
	}
	for in, want := range cases {
		if got := m.Unmap(in); got != want {
			t.Errorf("Unmap(%q) = %q, want %q", in, got, want)
		}
	}
}
