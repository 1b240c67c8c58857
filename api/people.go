package api

import (
	"bytes"
	"crypto/rand"
	"crypto/sha256"
	"crypto/subtle"
	"encoding/base64"
	"encoding/hex"
	"encoding/json"
	"errors"
	"fmt"
	"regexp"
	"sort"
	"strconv"
	"strings"
	"time"

	"golang.org/x/crypto/argon2"

	"handoff"
	"handoff/store"
)

// Person is someone who may use the service. ID is what their labels carry
// (it is also their annotator id). Admins may use the team's routes.
type Person struct {
	ID       string        `json:"id"`
	Admin    bool          `json:"admin"`
	Created  time.Time     `json:"created"`
	Practice PracticeState `json:"practice"`
}

// PracticeState is how far a person is through the practice (gold items
// shown with their answer) and the check (gold items whose answers are not
// shown) that come before real work.
//
// Done counts the practice items answered. CheckItems are the check items
// of the current attempt, in the order shown (drawn afresh for each
// attempt); CheckDone and CheckRight count its answers and those that
// matched the gold answer. Passed is set once an attempt reached the pass
// mark. Attempts counts finished check attempts; Extra counts attempts the
// team granted beyond Config.CheckAttempts.
type PracticeState struct {
	Done       int      `json:"done"`
	CheckItems []string `json:"check_items,omitempty"`
	CheckDone  int      `json:"check_done"`
	CheckRight int      `json:"check_right"`
	Passed     bool     `json:"passed"`
	Attempts   int      `json:"attempts"`
	Extra      int      `json:"extra,omitempty"`
}

// UnmarshalJSON reads a person's record, including records written before
// the practice gate got its present names (the state was stored under
// "training", with "step", "quiz_answered" and "quiz_correct").
func (p *Person) UnmarshalJSON(b []byte) error {
	type plain Person
	var rec struct {
		plain
		Old *struct {
			Step         int  `json:"step"`
			QuizAnswered int  `json:"quiz_answered"`
			QuizCorrect  int  `json:"quiz_correct"`
			Passed       bool `json:"passed"`
			Attempts     int  `json:"attempts"`
		} `json:"training"`
	}
	if err := json.Unmarshal(b, &rec); err != nil {
		return err
	}
	*p = Person(rec.plain)
	if o := rec.Old; o != nil && bytes.Index(b, []byte(`"practice"`)) < 0 {
		// An attempt under way in an old record had no drawn items: it
		// starts again with a fresh draw.
		p.Practice = PracticeState{Done: o.Step, Passed: o.Passed, Attempts: o.Attempts}
	}
	return nil
}

// tokenRecord is what the store keeps for a token: whose it is and an
// argon2id hash of its secret, never the secret.
type tokenRecord struct {
	Person  string    `json:"person"`
	Salt    []byte    `json:"salt"`
	Hash    []byte    `json:"hash"`
	Time    uint32    `json:"t"`
	Memory  uint32    `json:"m"` // KiB
	Threads uint8     `json:"p"`
	Created time.Time `json:"created"`
}

// argon2id parameters: 19 MiB, 2 passes, 1 thread — the OWASP Password
// Storage Cheat Sheet's first recommended setting (common practice).
const (
	argonTime    = 2
	argonMemory  = 19 * 1024
	argonThreads = 1
	argonLen     = 32
)

var personID = regexp.MustCompile(`^[A-Za-z0-9][A-Za-z0-9._@-]{0,63}$`)

// ErrPersonExists is returned by AddPerson for an id already taken.
var ErrPersonExists = errors.New("a person with this id already exists")

// AddPerson adds a person to the project and returns their first token
// (shown once; only its hash is stored). id is 1 to 64 letters, digits, '.',
// '_', '@' or '-', starting with a letter or digit.
func AddPerson(st *store.Store, id string, admin bool, source string) (string, error) {
	if !personID.MatchString(id) {
		return "", fmt.Errorf("person id %q: use 1 to 64 letters, digits, '.', '_', '@' or '-', starting with a letter or digit", id)
	}
	if _, err := st.Person(id); err == nil {
		return "", fmt.Errorf("person %q: %w (issue another token with `loop people token`)", id, ErrPersonExists)
	} else if !errors.Is(err, store.ErrNotFound) {
		return "", err
	}
	p := Person{ID: id, Admin: admin, Created: time.Now().UTC()}
	if err := putPerson(st, p, source); err != nil {
		return "", err
	}
	if _, err := st.PutAnnotators([]handoff.Annotator{{ID: id, Name: id, Admin: admin}}, source); err != nil {
		return "", err
	}
	return NewToken(st, id, source)
}

// NewToken issues another token for an existing person and returns it.
// A token is "ID.SECRET": ID (16 hex digits) finds the stored record, SECRET
// (32 random bytes, base64url) is checked against its argon2id hash.
func NewToken(st *store.Store, person string, source string) (string, error) {
	if _, err := getPerson(st, person); err != nil {
		return "", err
	}
	var idb [8]byte
	var secret [32]byte
	var salt [16]byte
	for _, b := range [][]byte{idb[:], secret[:], salt[:]} {
		if _, err := rand.Read(b); err != nil {
			return "", err
		}
	}
	tid := hex.EncodeToString(idb[:])
	sec := base64.RawURLEncoding.EncodeToString(secret[:])
	rec := tokenRecord{Person: person, Salt: salt[:], Time: argonTime, Memory: argonMemory, Threads: argonThreads,
		Created: time.Now().UTC()}
	rec.Hash = argon2.IDKey([]byte(sec), rec.Salt, rec.Time, rec.Memory, rec.Threads, argonLen)
	b, err := json.Marshal(rec)
	if err != nil {
		return "", err
	}
	if err := st.PutToken(tid, b, source); err != nil {
		return "", err
	}
	return tid + "." + sec, nil
}

// RevokeToken removes a token given either whole or by its id (the part
// before the dot), and returns the id of its person. A running server
// refuses it from its next request on (it checks the store on every
// request), and ends the page sessions opened with it.
func RevokeToken(st *store.Store, token string, source string) (string, error) {
	id, _, _ := strings.Cut(strings.TrimSpace(token), ".")
	b, err := st.Token(id)
	if errors.Is(err, store.ErrNotFound) {
		return "", fmt.Errorf("token %s: no such token (see `loop people list` for each person's token ids)", quoteID(id))
	}
	if err != nil {
		return "", err
	}
	var rec tokenRecord
	if err := json.Unmarshal(b, &rec); err != nil {
		return "", fmt.Errorf("token %s: damaged record: %w", id, err)
	}
	return rec.Person, st.DeleteToken(id, source)
}

// RevokePerson removes every token of a person and returns how many there
// were. The person stays in the project (their labels keep their id); they
// can no longer sign in until given a new token (NewToken).
func RevokePerson(st *store.Store, person string, source string) (int, error) {
	if _, err := getPerson(st, person); err != nil {
		return 0, err
	}
	toks, err := Tokens(st)
	if err != nil {
		return 0, err
	}
	var ids []string
	for _, t := range toks[person] {
		ids = append(ids, t.ID)
	}
	if len(ids) == 0 {
		return 0, nil
	}
	return len(ids), st.DeleteTokens(ids, source)
}

// TokenInfo is what may be shown of a token: its id (the part before the
// dot) and when it was issued. The secret is never stored.
type TokenInfo struct {
	ID      string    `json:"id"`
	Created time.Time `json:"created"`
}

// Tokens returns each person's tokens, oldest first.
func Tokens(st *store.Store) (map[string][]TokenInfo, error) {
	out := map[string][]TokenInfo{}
	err := st.Tokens(func(key string, data []byte) error {
		var rec tokenRecord
		if err := json.Unmarshal(data, &rec); err != nil {
			return fmt.Errorf("token %s: damaged record: %w", key, err)
		}
		out[rec.Person] = append(out[rec.Person], TokenInfo{ID: key, Created: rec.Created})
		return nil
	})
	for _, ts := range out {
		sort.Slice(ts, func(i, j int) bool { return ts[i].Created.Before(ts[j].Created) })
	}
	return out, err
}

// quoteID quotes an id for a message, escaping what is not printable.
func quoteID(s string) string {
	if len(s) > 70 {
		s = s[:70] + "…"
	}
	return strconv.Quote(s)
}

// People returns everyone who may use the service, ordered by id.
func People(st *store.Store) ([]Person, error) {
	var out []Person
	err := st.People(func(id string, data []byte) error {
		var p Person
		if err := json.Unmarshal(data, &p); err != nil {
			return fmt.Errorf("person %q: damaged record: %w", id, err)
		}
		out = append(out, p)
		return nil
	})
	return out, err
}

func getPerson(st *store.Store, id string) (Person, error) {
	b, err := st.Person(id)
	if err != nil {
		return Person{}, fmt.Errorf("person %q: %w", id, err)
	}
	var p Person
	if err := json.Unmarshal(b, &p); err != nil {
		return Person{}, fmt.Errorf("person %q: damaged record: %w", id, err)
	}
	return p, nil
}

func putPerson(st *store.Store, p Person, source string) error {
	b, err := json.Marshal(p)
	if err != nil {
		return err
	}
	return st.PutPerson(p.ID, b, source)
}

// errBadToken is any token that does not verify; the reply never says which
// part was wrong.
var errBadToken = errors.New("the token is not valid")

// splitToken splits a token into its id and secret, or reports that it is
// not of the form "ID.SECRET" (16 hex digits, a dot, 1 to 64 characters).
func splitToken(token string) (id, sec string, ok bool) {
	id, sec, ok = strings.Cut(token, ".")
	if !ok || len(id) != 16 || len(sec) == 0 || len(sec) > 64 {
		return "", "", false
	}
	if _, err := hex.DecodeString(id); err != nil {
		return "", "", false
	}
	return id, sec, true
}

// tokenRecordOf reads the stored record of token id (errBadToken if there
// is none).
func tokenRecordOf(st *store.Store, id string) (tokenRecord, error) {
	var rec tokenRecord
	b, err := st.Token(id)
	if errors.Is(err, store.ErrNotFound) {
		return rec, errBadToken
	}
	if err != nil {
		return rec, err
	}
	if err := json.Unmarshal(b, &rec); err != nil {
		return rec, fmt.Errorf("token %s: damaged record: %w", id, err)
	}
	if rec.Time == 0 || rec.Memory == 0 || rec.Threads == 0 || len(rec.Hash) == 0 {
		return rec, fmt.Errorf("token %s: damaged record (no hash parameters)", id)
	}
	return rec, nil
}

// matches reports whether sec is the secret whose argon2id hash rec keeps
// (about 50 ms of one core and 19 MiB).
func (rec tokenRecord) matches(sec string) bool {
	h := argon2.IDKey([]byte(sec), rec.Salt, rec.Time, rec.Memory, rec.Threads, uint32(len(rec.Hash)))
	return subtle.ConstantTimeCompare(h, rec.Hash) == 1
}

func tokenDigest(token string) [32]byte { return sha256.Sum256([]byte(token)) }
