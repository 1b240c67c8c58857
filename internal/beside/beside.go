// Package beside lets commands run beside a running `loop serve`.
//
// `loop serve DIR` holds the project file open (bbolt's file lock), so no
// other process can open it. So that the team can still read the project
// and manage people while it serves, the server records, in DIR/serve.json
// (mode 0600, removed when it stops), its process id, the address it
// serves and a loopback address with a random secret (Listen). A command
// that may run beside the server finds that file (ReadRecord), sends its
// command line — with DIR and the files it names made absolute (Paths) —
// and the secret to that loopback address (Send); the server runs the same
// command in its own process (Handler), against its open store (Served
// hands out a borrowed handle), and returns what it printed and its exit
// code, which the command prints and returns as its own. Files the command
// writes are written by the server process, as the user who started it.
//
// A file left behind by a server that was killed is stale: nothing answers
// at its address, or not with the secret (Serving), and the command runs
// as usual. Which commands may run beside a server is the caller's choice.
package beside

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

	"handoff/internal/atomicfile"
	"handoff/store"
)

// FileName is the name of the file a server writes in the project folder.
const FileName = "serve.json"

// Record is what serve.json holds.
type Record struct {
	PID     int       `json:"pid"`
	Serves  string    `json:"serves"`  // the address the pages and the API are served at
	Command string    `json:"command"` // http://127.0.0.1:PORT: the command channel, loopback only
	Secret  string    `json:"secret"`  // sent as a bearer token on the command channel
	Started time.Time `json:"started"`
}

// ReadRecord reads dir/serve.json, if there is a whole one.
func ReadRecord(dir string) (Record, bool) {
	var rec Record
	b, err := os.ReadFile(filepath.Join(dir, FileName))
	if err != nil || json.Unmarshal(b, &rec) != nil || rec.Command == "" || rec.Secret == "" {
		return Record{}, false
	}
	return rec, true
}

// RunFunc runs a command line in this process, writing what it prints to
// stdout and stderr, and returns its exit code.
type RunFunc func(ctx context.Context, args []string, stdout, stderr io.Writer) int

// AllowFunc says whether a command line may run beside the server, and
// whether it may change what the server keeps in memory (refresh).
type AllowFunc func(args []string) (refresh, ok bool)

// request and reply are the command channel's messages.
type request struct {
	Args []string `json:"args"`
}

// Reply is what a command run by the server printed, and its exit code.
type Reply struct {
	Stdout string `json:"stdout"`
	Stderr string `json:"stderr"`
	Code   int    `json:"code"`
}

// Handler answers a server's command channel: GET /ping and POST /run
// with the secret as a bearer token; only command lines allow accepts are
// run (with run), and after is called once one that may change the
// server's memory has run.
func Handler(secret string, allow AllowFunc, run RunFunc, after func()) http.Handler {
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
		var req request
		if err := json.NewDecoder(io.LimitReader(r.Body, 1<<20)).Decode(&req); err != nil {
			http.Error(w, "bad request", http.StatusBadRequest)
			return
		}
		refresh, ok := allow(req.Args)
		if !ok {
			http.Error(w, fmt.Sprintf("%q does not run beside the server", strings.Join(req.Args, " ")), http.StatusForbidden)
			return
		}
		var out, errb bytes.Buffer
		code := run(r.Context(), req.Args, &out, &errb)
		if refresh {
			after()
		}
		w.Header().Set("Content-Type", "application/json")
		json.NewEncoder(w).Encode(Reply{Stdout: out.String(), Stderr: errb.String(), Code: code})
	})
	return mux
}

// Channel is a server's command channel, listening on loopback.
type Channel struct {
	dir    string
	secret string
	srv    *http.Server
}

// Listen opens the command channel of a server of dir that serves at
// serves, records it in dir/serve.json, and registers st as the store
// commands run by the server use (Served). Close undoes all three.
func Listen(dir, serves string, st *store.Store, allow AllowFunc, run RunFunc, after func()) (*Channel, error) {
	ln, err := net.Listen("tcp", "127.0.0.1:0")
	if err != nil {
		return nil, err
	}
	c := &Channel{dir: dir, secret: newSecret()}
	c.srv = &http.Server{Handler: Handler(c.secret, allow, run, after), ReadHeaderTimeout: 10 * time.Second}
	rec := Record{PID: os.Getpid(), Serves: serves, Command: "http://" + ln.Addr().String(), Secret: c.secret, Started: time.Now().UTC()}
	b, _ := json.MarshalIndent(rec, "", "  ")
	err = atomicfile.Write(filepath.Join(dir, FileName), 0o600, func(w io.Writer) error {
		_, err := w.Write(append(b, '\n'))
		return err
	})
	if err != nil {
		ln.Close()
		return nil, fmt.Errorf("recording the server in %s: %w", dir, err)
	}
	register(dir, st)
	go c.srv.Serve(ln)
	return c, nil
}

// Close stops the channel (waiting for commands in flight until ctx is
// done), removes serve.json if it is still this server's, and forgets the
// store.
func (c *Channel) Close(ctx context.Context) error {
	err := c.srv.Shutdown(ctx)
	if errors.Is(err, http.ErrServerClosed) {
		err = nil
	}
	if rec, ok := ReadRecord(c.dir); ok && rec.Secret == c.secret {
		os.Remove(filepath.Join(c.dir, FileName))
	}
	unregister(c.dir)
	return err
}

// newSecret returns 32 random bytes in hex.
func newSecret() string {
	var b [32]byte
	if _, err := rand.Read(b[:]); err != nil {
		panic(err) // crypto/rand does not fail on supported systems
	}
	return hex.EncodeToString(b[:])
}

// served holds the stores this process serves, by absolute folder.
var served struct {
	sync.Mutex
	m map[string]*store.Store
}

func register(dir string, st *store.Store) {
	served.Lock()
	defer served.Unlock()
	if served.m == nil {
		served.m = map[string]*store.Store{}
	}
	served.m[absDir(dir)] = st
}

func unregister(dir string) {
	served.Lock()
	defer served.Unlock()
	delete(served.m, absDir(dir))
}

// Served returns a borrowed handle (store.Store.Borrow) on the store this
// process serves for dir, if it serves it.
func Served(dir string) (*store.Store, bool) {
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

// errNotServing is a command channel that does not answer as a server of
// ours would.
var errNotServing = errors.New("no loop server answers there")

// client talks to command channels: loopback, never through a proxy, and
// quick to give up on an address where nothing listens.
var client = &http.Client{Transport: &http.Transport{
	Proxy:       nil,
	DialContext: (&net.Dialer{Timeout: 3 * time.Second}).DialContext,
}}

// Serving reports whether the server of rec answers with its secret.
func Serving(rec Record) bool {
	ctx, cancel := context.WithTimeout(context.Background(), 3*time.Second)
	defer cancel()
	req, err := http.NewRequestWithContext(ctx, "GET", strings.TrimSuffix(rec.Command, "/")+"/ping", nil)
	if err != nil {
		return false
	}
	req.Header.Set("Authorization", "Bearer "+rec.Secret)
	resp, err := client.Do(req)
	if err != nil {
		return false
	}
	resp.Body.Close()
	return resp.StatusCode == http.StatusOK
}

// Send runs the command line args on the server of rec. An error means no
// server of ours answered (a stale serve.json).
func Send(rec Record, args []string) (Reply, error) {
	body, _ := json.Marshal(request{Args: args})
	req, err := http.NewRequestWithContext(context.Background(), "POST", strings.TrimSuffix(rec.Command, "/")+"/run", bytes.NewReader(body))
	if err != nil {
		return Reply{}, err
	}
	req.Header.Set("Authorization", "Bearer "+rec.Secret)
	req.Header.Set("Content-Type", "application/json")
	resp, err := client.Do(req)
	if err != nil {
		return Reply{}, err
	}
	defer resp.Body.Close()
	if resp.StatusCode != http.StatusOK {
		return Reply{}, fmt.Errorf("%w: %s", errNotServing, resp.Status)
	}
	var r Reply
	if err := json.NewDecoder(resp.Body).Decode(&r); err != nil {
		return Reply{}, fmt.Errorf("%w: %v", errNotServing, err)
	}
	return r, nil
}

// Paths makes the paths of a command line absolute before it is sent to
// the server (which runs in another folder) and maps them back in what the
// server printed. The zero value is ready to use.
type Paths struct {
	back map[string]string // absolute → as typed
}

// Abs returns p made absolute ("" and "-", standard output, stay as they
// are) and remembers it.
func (m *Paths) Abs(p string) string {
	if p == "" || p == "-" || filepath.IsAbs(p) {
		return p
	}
	a, err := filepath.Abs(p)
	if err != nil {
		return p
	}
	if m.back == nil {
		m.back = map[string]string{}
	}
	m.back[a] = p
	return a
}

// Unmap replaces the absolute paths Abs made in s by the paths as typed,
// longest first, so that a path inside another maps back whole.
func (m *Paths) Unmap(s string) string {
	keys := make([]string, 0, len(m.back))
	for k := range m.back {
		keys = append(keys, k)
	}
	sort.Slice(keys, func(i, j int) bool { return len(keys[i]) > len(keys[j]) })
	for _, k := range keys {
		// filepath.Join(".", x) is x: a folder typed as "." leaves no
		// prefix on the paths printed below it.
		if prefix := m.back[k] + "/"; m.back[k] == "." {
			s = strings.ReplaceAll(s, k+"/", "")
		} else {
			s = strings.ReplaceAll(s, k+"/", prefix)
		}
		s = strings.ReplaceAll(s, k, m.back[k])
	}
	return s
}
