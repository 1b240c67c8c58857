package main

// Working beside a running server.
//
// `loop serve DIR` holds the project file open (bbolt's file lock), so no
// other process can open it. So that the team can still read the project
// and manage people while it serves, the server records, in DIR/serve.json
// (mode 0600, removed when it stops), its process id, the address it
// serves and a loopback address with a random secret. A command that may
// run beside the server (besideServer) finds that file, sends its command
// line — with DIR and the files it names made absolute — and the secret to
// that loopback address; the server runs the same command in its own
// process, against its open store (openStore hands out a borrowed handle),
// and returns what it printed and its exit code, which the command prints
// and returns as its own. Output is the same whether or not a server runs.
// Files the command writes (--out, --html) are written by the server
// process, as the user who started it.
//
// A file left behind by a server that was killed is stale: nothing answers
// at its address, or not with the secret, and the command runs as usual.
// Commands that must not run beside the server (imports, rounds, init,
// demo, serve) fail with a message that says so and what to do instead.

import (
	"bytes"
	"context"
	"crypto/rand"
	"crypto/subtle"
	"encoding/hex"
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"net"
	"net/http"
	"os"
	"path/filepath"
	"sort"
	"strings"
	"sync"
	"time"

	"github.com/spf13/cobra"
	"github.com/spf13/pflag"

	"handoff/store"
)

// serveFile is the name of the file `loop serve` writes in the project
// folder.
const serveFile = "serve.json"

// serveRecord is what serve.json holds.
type serveRecord struct {
	PID     int       `json:"pid"`
	Serves  string    `json:"serves"`  // the address the pages and the API are served at
	Command string    `json:"command"` // http://127.0.0.1:PORT: the command channel, loopback only
	Secret  string    `json:"secret"`  // sent as a bearer token on the command channel
	Started time.Time `json:"started"`
}

// besideServer lists the commands that run beside a server, by command
// path, and whether they may change what the server keeps in memory (then
// the server reads it again afterwards).
var besideServer = map[string]bool{
	"loop status":         false,
	"loop consensus":      false,
	"loop agreement":      false,
	"loop verdict":        false,
	"loop export":         false,
	"loop rollup":         false,
	"loop compare":        false,
	"loop reference list": false,
	"loop waves":          false,
	"loop next":           true,
	"loop people add":     false,
	"loop people list":    false,
	"loop people token":   false,
	"loop people revoke":  false,
}

// pathFlags are the flags of those commands that name files, made absolute
// before a command is sent to the server ("-" means standard output).
var pathFlags = map[string]bool{"out": true, "html": true}

// served holds the stores `loop serve` has open in this process, by
// absolute folder, for commands run on its behalf (openStore).
var served struct {
	sync.Mutex
	m map[string]*store.Store
}

func registerServed(dir string, st *store.Store) {
	served.Lock()
	defer served.Unlock()
	if served.m == nil {
		served.m = map[string]*store.Store{}
	}
	served.m[absDir(dir)] = st
}

func unregisterServed(dir string) {
	served.Lock()
	defer served.Unlock()
	delete(served.m, absDir(dir))
}

// servedStore returns a borrowed handle on the store this process serves
// for dir, if it serves it.
func servedStore(dir string) (*store.Store, bool) {
	served.Lock()
	defer served.Unlock()
	st, ok := served.m[absDir(dir)]
	if !ok {
		return nil, false
	}
	return st.Borrow(), true
}

// absDir is dir made absolute, with symbolic links resolved when it exists.
func absDir(dir string) string {
	a, err := filepath.Abs(dir)
	if err != nil {
		return dir
	}
	if r, err := filepath.EvalSymlinks(a); err == nil {
		return r
	}
	return a
}

// readServeRecord reads dir/serve.json, if there is one.
func readServeRecord(dir string) (serveRecord, bool) {
	var rec serveRecord
	b, err := os.ReadFile(filepath.Join(dir, serveFile))
	if err != nil || json.Unmarshal(b, &rec) != nil || rec.Command == "" || rec.Secret == "" {
		return serveRecord{}, false
	}
	return rec, true
}

// writeServeRecord writes dir/serve.json (mode 0600) in one step.
func writeServeRecord(dir string, rec serveRecord) error {
	b, err := json.MarshalIndent(rec, "", "  ")
	if err != nil {
		return err
	}
	tmp := filepath.Join(dir, serveFile+".partial")
	if err := os.WriteFile(tmp, append(b, '\n'), 0o600); err != nil {
		return err
	}
	if err := os.Chmod(tmp, 0o600); err != nil { // WriteFile keeps an old file's mode
		os.Remove(tmp)
		return err
	}
	return os.Rename(tmp, filepath.Join(dir, serveFile))
}

// removeServeRecord removes dir/serve.json if it is still this server's.
func removeServeRecord(dir, secret string) {
	if rec, ok := readServeRecord(dir); ok && rec.Secret == secret {
		os.Remove(filepath.Join(dir, serveFile))
	}
}

// newSecret returns 32 random bytes in hex.
func newSecret() string {
	var b [32]byte
	if _, err := rand.Read(b[:]); err != nil {
		panic(err) // crypto/rand does not fail on supported systems
	}
	return hex.EncodeToString(b[:])
}

// commandRequest and commandReply are the command channel's messages.
type commandRequest struct {
	Args []string `json:"args"`
}

type commandReply struct {
	Stdout string `json:"stdout"`
	Stderr string `json:"stderr"`
	Code   int    `json:"code"`
}

// commandHandler answers the command channel of a server: POST /run with
// the secret as a bearer token and a commandRequest; only the commands of
// besideServer are run. after is called once a command that may change the
// server's memory has run.
func commandHandler(secret string, after func()) http.Handler {
	mux := http.NewServeMux()
	authorised := func(w http.ResponseWriter, r *http.Request) bool {
		tok, _ := strings.CutPrefix(r.Header.Get("Authorization"), "Bearer ")
		if subtle.ConstantTimeCompare([]byte(tok), []byte(secret)) != 1 {
			http.Error(w, "wrong secret", http.StatusUnauthorized)
			return false
		}
		return true
	}
	mux.HandleFunc("GET /ping", func(w http.ResponseWriter, r *http.Request) {
		if authorised(w, r) {
			io.WriteString(w, "serving\n")
		}
	})
	mux.HandleFunc("POST /run", func(w http.ResponseWriter, r *http.Request) {
		if !authorised(w, r) {
			return
		}
		var req commandRequest
		if err := json.NewDecoder(io.LimitReader(r.Body, 1<<20)).Decode(&req); err != nil {
			http.Error(w, "bad request", http.StatusBadRequest)
			return
		}
		_, _, refresh, ok := besideCommand(req.Args)
		if !ok {
			http.Error(w, fmt.Sprintf("%q does not run beside the server", strings.Join(req.Args, " ")), http.StatusForbidden)
			return
		}
		var out, errb bytes.Buffer
		code := runIn(r.Context(), req.Args, &out, &errb)
		if refresh {
			after()
		}
		w.Header().Set("Content-Type", "application/json")
		json.NewEncoder(w).Encode(commandReply{Stdout: out.String(), Stderr: errb.String(), Code: code})
	})
	return mux
}

// besideCommand finds the command args name (with the arguments left after
// its name) and reports whether it may change the server's memory and
// whether it runs beside a server.
func besideCommand(args []string) (c *cobra.Command, rest []string, refresh, ok bool) {
	c, rest, err := newRoot().Find(args)
	if err != nil || c == nil {
		return nil, nil, false, false
	}
	refresh, ok = besideServer[c.CommandPath()]
	return c, rest, refresh, ok
}

// forward sends the command line args to the server that serves its
// project, if one runs, prints what the server's run of it printed, and
// returns its exit code. ok is false when args should run here: not a
// command that runs beside a server, no server, a stale serve.json, or
// arguments that do not parse (the run here reports them).
func forward(args []string, stdout, stderr io.Writer) (code int, ok bool) {
	c, rest, _, beside := besideCommand(args)
	if !beside {
		return 0, false
	}
	if err := c.ParseFlags(rest); err != nil {
		return 0, false
	}
	pos := c.Flags().Args()
	if len(pos) == 0 {
		return 0, false
	}
	dir := pos[0]
	rec, found := readServeRecord(dir)
	if !found && c.Name() == "status" {
		// A workspace whose projects a server serves: the server runs the
		// whole status (it opens the other projects itself).
		if names, err := workspaceProjects(dir); err == nil {
			for _, n := range names {
				if rec, found = readServeRecord(filepath.Join(dir, n)); found {
					break
				}
			}
		}
	}
	if !found {
		return 0, false
	}
	// The command line again, with DIR and files made absolute; what the
	// server prints with those is mapped back to the names as typed.
	fwd := strings.Fields(strings.TrimPrefix(c.CommandPath(), "loop "))
	back := map[string]string{}
	abs := func(p string) string {
		if p == "" || p == "-" || filepath.IsAbs(p) {
			return p
		}
		a, err := filepath.Abs(p)
		if err != nil {
			return p
		}
		back[a] = p
		return a
	}
	simple := true
	c.Flags().Visit(func(f *pflag.Flag) {
		switch f.Value.Type() {
		case "string", "bool", "int", "int64", "uint64", "float64", "duration":
		default:
			simple = false
		}
		v := f.Value.String()
		if pathFlags[f.Name] {
			v = abs(v)
		}
		fwd = append(fwd, "--"+f.Name+"="+v)
	})
	if !simple {
		return 0, false
	}
	fwd = append(fwd, "--")
	for i, p := range pos {
		if i == 0 {
			p = abs(p)
		}
		fwd = append(fwd, p)
	}
	reply, err := sendCommand(rec, fwd)
	if err != nil {
		return 0, false // nothing answers: a stale serve.json
	}
	// Longest first, so that a path inside another maps back whole.
	keys := make([]string, 0, len(back))
	for k := range back {
		keys = append(keys, k)
	}
	sort.Slice(keys, func(i, j int) bool { return len(keys[i]) > len(keys[j]) })
	unmap := func(s string) string {
		for _, k := range keys {
			// filepath.Join(".", x) is x: a folder typed as "." leaves no
			// prefix on the paths printed below it.
			if prefix := back[k] + "/"; back[k] == "." {
				s = strings.ReplaceAll(s, k+"/", "")
			} else {
				s = strings.ReplaceAll(s, k+"/", prefix)
			}
			s = strings.ReplaceAll(s, k, back[k])
		}
		return s
	}
	io.WriteString(stdout, unmap(reply.Stdout))
	io.WriteString(stderr, unmap(reply.Stderr))
	return reply.Code, true
}

// errNotServing is a command channel that does not answer as a server of
// ours would.
var errNotServing = errors.New("no loop server answers there")

// commandClient talks to command channels: loopback, never through a
// proxy, and quick to give up on an address where nothing listens.
var commandClient = &http.Client{Transport: &http.Transport{
	Proxy:       nil,
	DialContext: (&net.Dialer{Timeout: 3 * time.Second}).DialContext,
}}

// serving reports whether the server of rec answers.
func serving(rec serveRecord) bool {
	ctx, cancel := context.WithTimeout(context.Background(), 3*time.Second)
	defer cancel()
	req, err := http.NewRequestWithContext(ctx, "GET", strings.TrimSuffix(rec.Command, "/")+"/ping", nil)
	if err != nil {
		return false
	}
	req.Header.Set("Authorization", "Bearer "+rec.Secret)
	resp, err := commandClient.Do(req)
	if err != nil {
		return false
	}
	resp.Body.Close()
	return resp.StatusCode == http.StatusOK
}

// sendCommand runs args on the server of rec.
func sendCommand(rec serveRecord, args []string) (commandReply, error) {
	body, _ := json.Marshal(commandRequest{Args: args})
	req, err := http.NewRequestWithContext(context.Background(), "POST", strings.TrimSuffix(rec.Command, "/")+"/run", bytes.NewReader(body))
	if err != nil {
		return commandReply{}, err
	}
	req.Header.Set("Authorization", "Bearer "+rec.Secret)
	req.Header.Set("Content-Type", "application/json")
	resp, err := commandClient.Do(req)
	if err != nil {
		return commandReply{}, err
	}
	defer resp.Body.Close()
	if resp.StatusCode != http.StatusOK {
		return commandReply{}, fmt.Errorf("%w: %s", errNotServing, resp.Status)
	}
	var r commandReply
	if err := json.NewDecoder(resp.Body).Decode(&r); err != nil {
		return commandReply{}, fmt.Errorf("%w: %v", errNotServing, err)
	}
	return r, nil
}

// besideError is the error of a command that cannot run beside the server
// that serves dir, or nil when no server answers there (openStore then
// opens the store as usual, and waits for the file lock).
func besideError(dir string) error {
	if rec, ok := readServeRecord(dir); ok && serving(rec) {
		return inUse(dir, store.ErrInUse)
	}
	return nil
}

// inUse turns store.Open's "in use" error into one that says which server
// holds the project and what to do.
func inUse(dir string, err error) error {
	if !errors.Is(err, store.ErrInUse) {
		return err
	}
	var names []string
	for k := range besideServer {
		names = append(names, strings.TrimPrefix(k, "loop "))
	}
	sort.Strings(names)
	if rec, ok := readServeRecord(dir); ok {
		return fmt.Errorf("%s is being served by `loop serve` (process %d, %s): this command cannot run beside it; "+
			"stop the server first (Ctrl-C), or use the board or the API (items, labels and gold can be imported through "+
			"POST /api/v1/items, /api/v1/labels/import, /api/v1/gold; rounds run from the board). These commands run beside "+
			"a server: %s", dir, rec.PID, rec.Serves, strings.Join(names, ", "))
	}
	return err
}
