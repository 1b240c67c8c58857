// Command service is the load benchmark of `loop serve`: many annotators at
// once fetch items and send labels over loopback, and afterwards the store
// is read back to count lost or doubled labels.
//
// It builds a fresh project in a temporary directory (items, one person per
// annotator), starts the server as a subprocess (the loop binary given by
// -loop), runs for -duration or until -max-labels labels are acknowledged,
// stops the server and reads the store. Each annotator loops: GET
// /api/v1/next, then POST /api/v1/labels with an idempotency key.
//
// With -peer it instead runs the same clients against a plain net/http
// server that writes each label in its own bbolt transaction (db.Update, one
// fsync per label, no group commit): the baseline group commit is measured
// against.
//
// It prints "key value" lines (labels_per_s, p50_ms, p99_ms, lost, …).
// It listens on loopback only and stops by itself.
package main

import (
	"bufio"
	"encoding/binary"
	"encoding/json"
	"flag"
	"fmt"
	"io"
	"log"
	"net"
	"net/http"
	"os"
	"os/exec"
	"path/filepath"
	"runtime"
	"runtime/debug"
	"runtime/pprof"
	"slices"
	"strconv"
	"strings"
	"sync"
	"sync/atomic"
	"syscall"
	"time"

	"handoff"
	"handoff/api"
	"handoff/store"
)

func main() {
	var (
		loopBin    = flag.String("loop", "", "path of the loop binary (required unless -peer)")
		annotators = flag.Int("annotators", 200, "concurrent annotators")
		items      = flag.Int("items", 40000, "items in the project")
		duration   = flag.Duration("duration", 10*time.Second, "longest measured run")
		maxLabels  = flag.Int("max-labels", 100000, "stop after this many acknowledged labels")
		warmup     = flag.Duration("warmup", 2*time.Second, "unmeasured run before the measured one")
		peer       = flag.Bool("peer", false, "run against the one-transaction-per-label baseline instead")
		keep       = flag.String("dir", "", "project directory (default: a temporary one, removed afterwards)")
		cpuprofile = flag.String("cpuprofile", "", "write the clients' CPU profile of the measured run to this file")
		separate   = flag.Bool("separate", false, "fetch each item with its own GET /api/v1/next instead of asking for it in the label's reply")
	)
	flag.Parse()
	// The clients share the cores with the server under test: collect
	// their garbage less often (as the server does, see
	// api.DefaultGCPercent) so that the load generator takes less CPU.
	debug.SetGCPercent(400)
	if !*peer && *loopBin == "" {
		log.Fatal("give -loop PATH (go build -o /tmp/loop ./cmd/loop)")
	}
	dir := *keep
	if dir == "" {
		d, err := os.MkdirTemp("", "handoff-bench-*")
		if err != nil {
			log.Fatal(err)
		}
		defer os.RemoveAll(d)
		dir = filepath.Join(d, "proj")
	}
	cb := handoff.Codebook{Name: "bench", Question: "Which?", Classes: []handoff.Class{{Key: "a"}, {Key: "b"}, {Key: "c"}}}
	st, err := store.Create(dir, cb, "bench")
	if err != nil {
		log.Fatal(err)
	}
	its := make([]handoff.Item, *items)
	for i := range its {
		its[i] = handoff.Item{ID: fmt.Sprintf("it%06d", i), Kind: handoff.KindText, Text: fmt.Sprintf("bench item %d", i)}
	}
	if _, err := st.PutItems(its, false, "bench"); err != nil {
		log.Fatal(err)
	}
	tokens := make([]string, *annotators)
	t0 := time.Now()
	var wg sync.WaitGroup
	var tokErr atomic.Value
	sem := make(chan struct{}, runtime.NumCPU())
	for a := range tokens {
		wg.Add(1)
		sem <- struct{}{}
		go func(a int) {
			defer wg.Done()
			defer func() { <-sem }()
			tok, err := api.AddPerson(st, fmt.Sprintf("ann%03d", a), false, "bench")
			if err != nil {
				tokErr.Store(err)
			}
			tokens[a] = tok
		}(a)
	}
	wg.Wait()
	if e := tokErr.Load(); e != nil {
		log.Fatal(e)
	}
	fmt.Printf("setup_seconds %.1f\n", time.Since(t0).Seconds())

	var base string
	var stopServer func()
	if *peer {
		base, stopServer = startPeer(st, tokens)
	} else {
		st.Close()
		base, stopServer = startLoop(*loopBin, dir)
	}

	client := newClients(base, *annotators)
	defer client.close()
	// Warm-up: every token is verified once (argon2id) and connections open.
	run(client, base, tokens, *warmup, *maxLabels, "w", *separate)
	if *cpuprofile != "" {
		f, err := os.Create(*cpuprofile)
		if err != nil {
			log.Fatal(err)
		}
		if err := pprof.StartCPUProfile(f); err != nil {
			log.Fatal(err)
		}
	}
	res := run(client, base, tokens, *duration, *maxLabels, "m", *separate)
	pprof.StopCPUProfile()
	stopServer()

	if !*peer {
		st, err = store.Open(dir)
		if err != nil {
			log.Fatalf("reopening the store: %v", err)
		}
	}
	defer st.Close()
	stored := map[string]int{}
	labels, err := st.Labels()
	if err != nil {
		log.Fatal(err)
	}
	for _, l := range labels {
		stored[l.Item+"/"+l.Annotator]++
	}
	lost, doubled := 0, 0
	for _, k := range res.acked {
		if stored[k] == 0 {
			lost++
		}
	}
	for _, n := range stored {
		if n > 1 {
			doubled++
		}
	}
	lat := res.labelLat
	slices.Sort(lat)
	nlat := res.nextLat
	slices.Sort(nlat)
	q := func(x []time.Duration, p float64) float64 {
		if len(x) == 0 {
			return 0
		}
		return float64(x[int(p*float64(len(x)-1))].Microseconds()) / 1000
	}
	mode := "ours"
	if *peer {
		mode = "peer"
	}
	fmt.Printf("mode %s\n", mode)
	fmt.Printf("annotators %d\n", *annotators)
	fmt.Printf("seconds %.2f\n", res.elapsed.Seconds())
	fmt.Printf("acknowledged %d\n", len(res.acked))
	fmt.Printf("labels_per_s %.0f\n", float64(len(res.acked))/res.elapsed.Seconds())
	fmt.Printf("p50_ms %.2f\n", q(lat, 0.50))
	fmt.Printf("p99_ms %.2f\n", q(lat, 0.99))
	fmt.Printf("next_p50_ms %.2f\n", q(nlat, 0.50))
	fmt.Printf("next_p99_ms %.2f\n", q(nlat, 0.99))
	fmt.Printf("errors %d\n", res.errors)
	fmt.Printf("stored_total %d\n", len(labels))
	fmt.Printf("lost %d\n", lost)
	fmt.Printf("doubled %d\n", doubled)
}

type result struct {
	acked    []string // item/annotator
	labelLat []time.Duration
	nextLat  []time.Duration
	elapsed  time.Duration
	errors   int
}

// run lets every annotator fetch and label items until d has passed or max
// labels are acknowledged.
func run(client *clients, base string, tokens []string, d time.Duration, max int, tag string, separate bool) result {
	var (
		mu    sync.Mutex
		res   result
		count atomic.Int64
		wg    sync.WaitGroup
	)
	start := time.Now()
	deadline := start.Add(d)
	for a, tok := range tokens {
		wg.Add(1)
		go func(a int, tok string) {
			defer wg.Done()
			var acked []string
			var ll, nl []time.Duration
			errs := 0
			var nr *slimNext
			for k := 0; time.Now().Before(deadline) && count.Load() < int64(max); k++ {
				if nr == nil || nr.Lease == nil {
					t0 := time.Now()
					code, b := client.conn(a).do("GET", "/api/v1/next", tok, nil, "")
					nl = append(nl, time.Since(t0))
					nr = new(slimNext)
					if code != http.StatusOK || json.Unmarshal(b, nr) != nil {
						errs++
						nr = nil
						continue
					}
					if nr.Lease == nil {
						time.Sleep(10 * time.Millisecond)
						continue
					}
				}
				body, _ := json.Marshal(api.LabelRequest{Lease: nr.Lease.ID, Item: nr.Item.ID, Label: []string{"a", "b", "c"}[k%3], Seconds: 1.5, Next: !separate})
				key := fmt.Sprintf("%s-%d-%d", tag, a, k)
				t1 := time.Now()
				code, b := client.conn(a).do("POST", "/api/v1/labels", tok, body, key)
				ll = append(ll, time.Since(t1))
				item := nr.Item.ID
				nr = nil
				if code != http.StatusCreated && code != http.StatusOK {
					errs++
					continue
				}
				count.Add(1)
				acked = append(acked, item+"/"+fmt.Sprintf("ann%03d", a))
				if !separate {
					var lr slimLabelReply
					if json.Unmarshal(b, &lr) == nil && lr.Next != nil {
						nr = lr.Next
					}
				}
			}
			mu.Lock()
			res.acked = append(res.acked, acked...)
			res.labelLat = append(res.labelLat, ll...)
			res.nextLat = append(res.nextLat, nl...)
			res.errors += errs
			mu.Unlock()
		}(a, tok)
	}
	wg.Wait()
	res.elapsed = time.Since(start)
	return res
}

// slimNext is the part of api.NextReply the clients use (decoding only the
// ids keeps the load generator's CPU, which shares the cores with the
// server, low).
type slimNext struct {
	Lease *struct {
		ID string `json:"id"`
	} `json:"lease"`
	Item *struct {
		ID string `json:"id"`
	} `json:"item"`
}

// slimLabelReply is the part of api.LabelReply the clients use.
type slimLabelReply struct {
	Next *slimNext `json:"next"`
}

// clients holds one kept-alive HTTP/1.1 connection per annotator. Each
// annotator sends one request at a time and reads its answer on its own
// connection, with no goroutines or channels in between (what wrk does): the
// load generator shares the two cores with the server, and net/http's
// client spends about as much CPU per request as the server does.
type clients struct {
	host  string
	conns []*conn
}

func newClients(base string, n int) *clients {
	cl := &clients{host: strings.TrimPrefix(base, "http://")}
	for range n {
		cl.conns = append(cl.conns, &conn{host: cl.host})
	}
	return cl
}

func (cl *clients) conn(a int) *conn { return cl.conns[a] }

func (cl *clients) close() {
	for _, k := range cl.conns {
		k.drop()
	}
}

// conn is one annotator's connection (used by one goroutine at a time).
type conn struct {
	host string
	c    net.Conn
	r    *bufio.Reader
	w    *bufio.Writer
}

func (k *conn) drop() {
	if k.c != nil {
		k.c.Close()
		k.c = nil
	}
}

// do sends one request and returns the status and body (0, nil when the
// exchange failed twice). A request that fails on a kept-alive connection is
// sent again on a new one, as net/http does for requests with an
// Idempotency-Key; the server answers a repeated label as a duplicate.
func (k *conn) do(method, path, tok string, body []byte, key string) (int, []byte) {
	for attempt := 0; attempt < 2; attempt++ {
		if k.c == nil {
			c, err := net.DialTimeout("tcp", k.host, 10*time.Second)
			if err != nil {
				return 0, nil
			}
			k.c, k.r, k.w = c, bufio.NewReaderSize(c, 8<<10), bufio.NewWriterSize(c, 4<<10)
		}
		k.c.SetDeadline(time.Now().Add(10 * time.Second))
		w := k.w
		w.WriteString(method)
		w.WriteByte(' ')
		w.WriteString(path)
		w.WriteString(" HTTP/1.1\r\nHost: ")
		w.WriteString(k.host)
		w.WriteString("\r\nAuthorization: Bearer ")
		w.WriteString(tok)
		if key != "" {
			w.WriteString("\r\nIdempotency-Key: ")
			w.WriteString(key)
			w.WriteString("\r\nContent-Type: application/json")
		}
		if body != nil {
			w.WriteString("\r\nContent-Length: ")
			w.WriteString(strconv.Itoa(len(body)))
		}
		w.WriteString("\r\n\r\n")
		w.Write(body)
		if err := w.Flush(); err != nil {
			k.drop()
			continue
		}
		resp, err := http.ReadResponse(k.r, nil)
		if err != nil {
			k.drop()
			continue
		}
		b, err := io.ReadAll(resp.Body)
		resp.Body.Close()
		if err != nil {
			k.drop()
			continue
		}
		if resp.Close {
			k.drop()
		}
		return resp.StatusCode, b
	}
	return 0, nil
}

// startLoop runs `loop serve` on a free loopback port.
func startLoop(bin, dir string) (string, func()) {
	cmd := exec.Command(bin, "serve", dir, "--addr", "127.0.0.1:0", "--practice", "0", "--check", "0",
		"--rate", "100000", "--burst", "100000")
	out, err := cmd.StdoutPipe()
	if err != nil {
		log.Fatal(err)
	}
	cmd.Stderr = os.Stderr
	if err := cmd.Start(); err != nil {
		log.Fatal(err)
	}
	buf := make([]byte, 512)
	n, err := out.Read(buf)
	if err != nil {
		log.Fatalf("loop serve: %v", err)
	}
	line := string(buf[:n])
	i := strings.Index(line, "http://")
	if i < 0 {
		log.Fatalf("loop serve printed %q", line)
	}
	base, _, _ := strings.Cut(strings.TrimSpace(line[i:]), " ")
	go io.Copy(io.Discard, out)
	return base, func() {
		cmd.Process.Signal(syscall.SIGTERM)
		cmd.Wait()
	}
}

// startPeer serves the baseline: the same two routes, tokens checked
// against a plain map (no hashing), items handed out round-robin from a
// counter, and each label written by store.PutLabels — its own transaction
// and fsync — without leases, idempotency keys or group commit.
func startPeer(st *store.Store, tokens []string) (string, func()) {
	who := map[string]string{}
	for a, t := range tokens {
		who[t] = fmt.Sprintf("ann%03d", a)
	}
	ids, err := st.ItemIDs()
	if err != nil {
		log.Fatal(err)
	}
	var next atomic.Int64
	mux := http.NewServeMux()
	auth := func(r *http.Request) (string, bool) {
		a, ok := who[strings.TrimPrefix(r.Header.Get("Authorization"), "Bearer ")]
		return a, ok
	}
	mux.HandleFunc("GET /api/v1/next", func(w http.ResponseWriter, r *http.Request) {
		if _, ok := auth(r); !ok {
			w.WriteHeader(401)
			return
		}
		n := next.Add(1) - 1
		id := ids[int(n)%len(ids)]
		var k [8]byte
		binary.BigEndian.PutUint64(k[:], uint64(n))
		json.NewEncoder(w).Encode(api.NextReply{Lease: &api.LeaseView{ID: fmt.Sprintf("%x", k), Item: id}, Item: &api.ItemView{ID: id, Kind: "text", Text: "x"}})
	})
	mux.HandleFunc("POST /api/v1/labels", func(w http.ResponseWriter, r *http.Request) {
		a, ok := auth(r)
		if !ok {
			w.WriteHeader(401)
			return
		}
		var req api.LabelRequest
		if err := json.NewDecoder(io.LimitReader(r.Body, 1<<16)).Decode(&req); err != nil {
			w.WriteHeader(400)
			return
		}
		if _, err := st.PutLabels([]handoff.Label{{Item: req.Item, Annotator: a, Class: req.Label, Time: time.Now(), Seconds: req.Seconds}}, "peer"); err != nil {
			w.WriteHeader(422)
			return
		}
		w.WriteHeader(201)
		w.Write([]byte(`{}`))
	})
	ln, err := net.Listen("tcp", "127.0.0.1:0")
	if err != nil {
		log.Fatal(err)
	}
	hs := &http.Server{Handler: mux}
	go hs.Serve(ln)
	return "http://" + ln.Addr().String(), func() { hs.Close() }
}
