// Package store keeps a project in one bbolt file, DIR/handoff.db. It is the
// only package that imports go.etcd.io/bbolt.
//
// The file holds, one bucket each: meta (schema version, codebook), items,
// labels with indexes by item and by annotator, gold answers, annotators, an
// append-only audit trail, and the results of later steps (consensus, models,
// rounds, selections, machine labels, people, tokens) and the service's
// leases and submissions (service.go).
//
// Every write method takes a source string saying who or what made the change
// (a command line such as "loop items add items.csv", or a request such as
// "api POST /labels by ann7"); it is recorded in the audit trail together with
// the time and what changed. An import either lands whole or changes
// nothing: small writes are one transaction; item and label imports are
// written in chunks of ImportChunk records (bounded memory for files of any
// size) and removed again if a later chunk fails — or, if the process dies
// half-way, by the next Open. While a chunked import runs, other writers in
// the process wait, and readers may see the part written so far.
//
// Only one process can have the file open at a time (bbolt's file lock);
// a second one gives up after a few seconds with a message saying so.
//
// Items and annotators get dense numbers (0, 1, 2, … in order of arrival) that
// never change; labels refer to them by number, so that all labels can be read
// as compact arrays (see LabelTable and EachLabel).
//
// Size: about 2,800 lines, because it is the one package that touches
// bbolt: every bucket's encoding, chunked imports with their rollback, the
// group commit of the service, snapshots and the round commit live here so
// that no other package needs the file's layout.
package store

import (
	"encoding/binary"
	"encoding/json"
	"errors"
	"fmt"
	"os"
	"path/filepath"
	"sync"
	"time"

	bolt "go.etcd.io/bbolt"

	"handoff"
)

// fileName is the name of the database file inside a project directory.
const fileName = "handoff.db"

// schemaVersion is the layout version this package writes. A file with a
// higher version is refused by Open (errNewerSchema).
const schemaVersion = 1

// Bucket names and what each holds (callers use the methods, not these).
var (
	bMeta          = []byte("meta")
	bItems         = []byte("items")           // item number (8 bytes BE) → kind byte + JSON item
	bItemIDs       = []byte("item_ids")        // item id → item number
	bLabels        = []byte("labels")          // label number → packed label (see encodeLabel)
	bLabelItem     = []byte("labels_by_item")  // item number ‖ label number → nil
	bLabelAnn      = []byte("labels_by_annot") // annotator number ‖ label number → nil
	bAnnotators    = []byte("annotators")      // annotator number → JSON annotator
	bAnnotatorIDs  = []byte("annotator_ids")   // annotator id → annotator number
	bGold          = []byte("gold")            // item id → JSON gold
	bAudit         = []byte("audit")           // entry number → JSON AuditEntry
	bConsensus     = []byte("consensus")       // item id → JSON consensus
	bModels        = []byte("models")          // version → model bytes
	bModelOrder    = []byte("model_order")     // sequence number → version
	bRounds        = []byte("rounds")          // round number → bytes
	bSelections    = []byte("selections")      // round number → bytes
	bMachineLabels = []byte("machine_labels")  // MachineKey (item id, + "\x00" + question for a follow-up) → JSON machine label
	bPeople        = []byte("people")          // person id → bytes
	bTokens        = []byte("tokens")          // token (hash) → bytes
	bLeases        = []byte("leases")          // unused; made and checked so that files stay readable by earlier releases
)

var allBuckets = [][]byte{bMeta, bItems, bItemIDs, bLabels, bLabelItem, bLabelAnn,
	bAnnotators, bAnnotatorIDs, bGold, bAudit, bConsensus, bModels, bModelOrder,
	bRounds, bSelections, bMachineLabels, bPeople, bTokens, bLeases}

var (
	kSchema        = []byte("schema")
	kCodebook      = []byte("codebook")
	kConsensusMeta = []byte("consensus_meta")
)

// errNoProject is returned by Open when DIR holds no project file.
var errNoProject = errors.New("no project here: run `loop init DIR --codebook FILE` first")

// errNewerSchema is returned (wrapped) by Open when the file was written by a
// newer version of loop.
var errNewerSchema = errors.New("project file has a newer schema")

// errExists is returned by Create when DIR already holds a project.
var errExists = errors.New("a project already exists here")

// ErrInUse is returned (wrapped) by Open when another process holds the
// project file open (bbolt's file lock) for longer than Open waits.
var ErrInUse = errors.New("the project is in use by another loop process")

// ErrNotFound is returned by getters when the key is absent.
var ErrNotFound = errors.New("not found")

// DataError is a problem with one record given to an import: the record is
// refused and the whole import is rolled back. Field names the offending
// field ("id", "item", "label", …). Callers that know where the record came
// from (file and line) add that.
type DataError struct {
	Field string
	Err   error
}

// Error names the field and what is wrong with it.
func (e *DataError) Error() string {
	if e.Field == "" {
		return e.Err.Error()
	}
	return fmt.Sprintf("field %q: %v", e.Field, e.Err)
}

// Unwrap returns the underlying error.
func (e *DataError) Unwrap() error { return e.Err }

func dataErr(field, format string, a ...any) *DataError {
	return &DataError{Field: field, Err: fmt.Errorf(format, a...)}
}

// Store is an open project file. It is safe for concurrent use by several
// goroutines of one process; a second process waits up to a few seconds for
// the file lock and then gives up.
type Store struct {
	db   *bolt.DB
	dir  string
	cb   handoff.Codebook
	cbIx map[string]int
	// qIx[q] maps the class keys of question q (position in cb.All()) to
	// their index within the question.
	qIx []map[string]int
	// wmu: a chunked import holds it exclusively for its whole run (so that
	// its rollback cannot remove anyone else's writes); every other write
	// holds it shared, so they still run as usual among themselves. Shared
	// with borrowed handles (Borrow).
	wmu *sync.RWMutex
	// borrowed: Close does nothing (see Borrow).
	borrowed bool

	// ImportChunk is the number of records an import writes per
	// transaction; defaultImportChunk if ≤ 0.
	ImportChunk int

	// Now gives the time recorded in the audit trail; time.Now if nil.
	Now func() time.Time
}

func options() *bolt.Options {
	return &bolt.Options{
		Timeout:        3 * time.Second,
		NoFreelistSync: true,
		FreelistType:   bolt.FreelistMapType,
	}
}

// Path returns the database file path for project directory dir.
func Path(dir string) string { return filepath.Join(dir, fileName) }

// Create makes a new project in dir (created if missing) with the given
// codebook, which must be valid. It fails with errExists if dir already has
// a project.
func Create(dir string, cb handoff.Codebook, source string) (*Store, error) {
	if err := cb.Validate(); err != nil {
		return nil, fmt.Errorf("codebook: %w", err)
	}
	if err := checkTree(cb); err != nil {
		return nil, fmt.Errorf("codebook: %w", err)
	}
	if err := os.MkdirAll(dir, 0o755); err != nil {
		return nil, err
	}
	p := Path(dir)
	if _, err := os.Stat(p); err == nil {
		return nil, fmt.Errorf("%s: %w", p, errExists)
	}
	db, err := bolt.Open(p, 0o644, options())
	if err != nil {
		return nil, fmt.Errorf("create %s: %w", p, err)
	}
	s := &Store{db: db, dir: dir, wmu: new(sync.RWMutex)}
	err = db.Update(func(tx *bolt.Tx) error {
		for _, name := range allBuckets {
			if _, err := tx.CreateBucketIfNotExists(name); err != nil {
				return err
			}
		}
		m := tx.Bucket(bMeta)
		var v [4]byte
		binary.BigEndian.PutUint32(v[:], schemaVersion)
		if err := m.Put(kSchema, v[:]); err != nil {
			return err
		}
		cbj, err := json.Marshal(cb)
		if err != nil {
			return err
		}
		if err := m.Put(kCodebook, cbj); err != nil {
			return err
		}
		return s.audit(tx, source, "init", fmt.Sprintf("codebook %q with %d classes", cb.Name, len(cb.Classes)))
	})
	if err != nil {
		db.Close()
		os.Remove(p)
		return nil, err
	}
	s.setCodebook(cb)
	return s, nil
}

// Open opens the project in dir. It returns errNoProject if there is none,
// and an error wrapping errNewerSchema if the file was written by a newer
// loop.
func Open(dir string) (*Store, error) {
	p := Path(dir)
	if _, err := os.Stat(p); err != nil {
		if errors.Is(err, os.ErrNotExist) {
			return nil, fmt.Errorf("%s: %w", dir, errNoProject)
		}
		return nil, err
	}
	db, err := bolt.Open(p, 0o644, options())
	if err != nil {
		if errors.Is(err, bolt.ErrTimeout) {
			return nil, fmt.Errorf("open %s: %w; wait for it to finish", p, ErrInUse)
		}
		return nil, fmt.Errorf("open %s: %w", p, err)
	}
	s := &Store{db: db, dir: dir, wmu: new(sync.RWMutex)}
	var cb handoff.Codebook
	err = db.View(func(tx *bolt.Tx) error {
		m := tx.Bucket(bMeta)
		if m == nil {
			return fmt.Errorf("%s is not a loop project file (no meta bucket)", p)
		}
		v := m.Get(kSchema)
		if len(v) != 4 {
			return fmt.Errorf("%s is not a loop project file (no schema version)", p)
		}
		if n := binary.BigEndian.Uint32(v); n > schemaVersion {
			return fmt.Errorf("%s: %w (version %d; this loop knows up to %d): upgrade loop to open it",
				p, errNewerSchema, n, schemaVersion)
		}
		for _, name := range allBuckets {
			if tx.Bucket(name) == nil {
				return fmt.Errorf("%s: bucket %q missing: the file is damaged", p, name)
			}
		}
		return json.Unmarshal(m.Get(kCodebook), &cb)
	})
	if err != nil {
		db.Close()
		return nil, err
	}
	s.setCodebook(cb)
	if err := s.rollback(); err != nil {
		db.Close()
		return nil, fmt.Errorf("open %s: undoing an interrupted import: %w", p, err)
	}
	return s, nil
}

func (s *Store) setCodebook(cb handoff.Codebook) {
	s.cb = cb
	s.cbIx = make(map[string]int, len(cb.Classes))
	for i, c := range cb.Classes {
		s.cbIx[c.Key] = i
	}
	all := cb.All()
	s.qIx = make([]map[string]int, len(all))
	for q, x := range all {
		s.qIx[q] = make(map[string]int, len(x.Classes))
		for i, c := range x.Classes {
			s.qIx[q][c.Key] = i
		}
	}
}

// Close closes the file (a borrowed handle's Close does nothing).
func (s *Store) Close() error {
	if s.borrowed {
		return nil
	}
	err := s.db.Close()
	groups.Delete(s.db)
	tokenGens.Delete(s.db)
	return err
}

// Borrow returns another handle on the same open file, for code that will
// Close what it was given while the owner keeps using the file (a command
// run inside `loop serve`): its Close does nothing. Writes through either
// handle share the write lock and the group commit. ImportChunk and Now
// start as the owner's and are the handle's own.
func (s *Store) Borrow() *Store {
	return &Store{db: s.db, dir: s.dir, cb: s.cb, cbIx: s.cbIx, qIx: s.qIx, wmu: s.wmu, borrowed: true,
		ImportChunk: s.ImportChunk, Now: s.Now}
}

// Codebook returns the project's codebook.
func (s *Store) Codebook() handoff.Codebook { return s.cb }

func (s *Store) now() time.Time {
	if s.Now != nil {
		return s.Now().UTC()
	}
	return time.Now().UTC()
}

func u64(n uint64) []byte {
	b := make([]byte, 8)
	binary.BigEndian.PutUint64(b, n)
	return b
}

func pair(a, b uint64) []byte {
	k := make([]byte, 16)
	binary.BigEndian.PutUint64(k, a)
	binary.BigEndian.PutUint64(k[8:], b)
	return k
}

func putJSON(b *bolt.Bucket, k []byte, v any) error {
	j, err := json.Marshal(v)
	if err != nil {
		return err
	}
	return b.Put(k, j)
}
