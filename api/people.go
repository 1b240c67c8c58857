package api

import (
	"crypto/rand"
	"crypto/sha256"
	"crypto/subtle"
	"encoding/base64"
	"encoding/hex"
	"encoding/json"
	"errors"
	"fmt"
	"regexp"
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
	Training TrainingState `json:"training"`
}

// TrainingState is how far a person is through the training and the quiz.
// Step counts the training items answered; QuizAnswered and QuizCorrect the
// quiz items of the current attempt; Passed is set once a quiz attempt
// reached the pass mark; Attempts counts finished quiz attempts.
type TrainingState struct {
	Step         int  `json:"step"`
	QuizAnswered int  `json:"quiz_answered"`
	QuizCorrect  int  `json:"quiz_correct"`
	Passed       bool `json:"passed"`
	Attempts     int  `json:"attempts"`
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
// before the dot).
func RevokeToken(st *store.Store, token string, source string) error {
	id, _, _ := strings.Cut(token, ".")
	if _, err := st.Token(id); err != nil {
		return fmt.Errorf("token %q: %w", id, err)
	}
	return st.DeleteToken(id, source)
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

// verifyToken checks a whole token against the store and returns its
// person's id.
func verifyToken(st *store.Store, token string) (string, error) {
	id, sec, ok := strings.Cut(token, ".")
	if !ok || len(id) != 16 || len(sec) == 0 || len(sec) > 64 {
		return "", errBadToken
	}
	if _, err := hex.DecodeString(id); err != nil {
		return "", errBadToken
	}
	b, err := st.Token(id)
	if errors.Is(err, store.ErrNotFound) {
		return "", errBadToken
	}
	if err != nil {
		return "", err
	}
	var rec tokenRecord
	if err := json.Unmarshal(b, &rec); err != nil {
		return "", fmt.Errorf("token %s: damaged record: %w", id, err)
	}
	if rec.Time == 0 || rec.Memory == 0 || rec.Threads == 0 || len(rec.Hash) == 0 {
		return "", fmt.Errorf("token %s: damaged record (no hash parameters)", id)
	}
	h := argon2.IDKey([]byte(sec), rec.Salt, rec.Time, rec.Memory, rec.Threads, uint32(len(rec.Hash)))
	if subtle.ConstantTimeCompare(h, rec.Hash) != 1 {
		return "", errBadToken
	}
	return rec.Person, nil
}

func tokenDigest(token string) [32]byte { return sha256.Sum256([]byte(token)) }
