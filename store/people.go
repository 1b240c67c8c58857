package store

// People and their access tokens, for the HTTP API: the records are the
// caller's bytes (package api keeps JSON with a role and a hash of each
// token, never the token).

import (
	"fmt"
	"sync"
	"sync/atomic"

	bolt "go.etcd.io/bbolt"
)

// PutPerson stores a person's record (free-form bytes, e.g. JSON with a
// password hash and role) under id, replacing any earlier one.
func (s *Store) PutPerson(id string, data []byte, source string) error {
	return s.update(source, "person.put", fmt.Sprintf("person %q", id), func(tx *bolt.Tx) error {
		return tx.Bucket(bPeople).Put([]byte(id), append([]byte(nil), data...))
	})
}

// Person returns a person's record, or ErrNotFound.
func (s *Store) Person(id string) ([]byte, error) { return s.get(bPeople, []byte(id)) }

// People calls fn for every person, ordered by id.
func (s *Store) People(fn func(id string, data []byte) error) error {
	return s.each(bPeople, func(k, v []byte) error { return fn(string(k), v) })
}

// PutToken stores an access token's record under key (store a hash of the
// token, never the token itself). The audit entry does not show the key.
func (s *Store) PutToken(key string, data []byte, source string) error {
	return s.update(source, "token.put", "token issued", func(tx *bolt.Tx) error {
		return tx.Bucket(bTokens).Put([]byte(key), append([]byte(nil), data...))
	})
}

// Token returns a token's record, or ErrNotFound.
func (s *Store) Token(key string) ([]byte, error) { return s.get(bTokens, []byte(key)) }

// Tokens calls fn for every token record, ordered by key.
func (s *Store) Tokens(fn func(key string, data []byte) error) error {
	return s.each(bTokens, func(k, v []byte) error { return fn(string(k), v) })
}

// DeleteTokens removes tokens (absent ones are ignored) in one transaction,
// with one audit entry that does not show the keys.
func (s *Store) DeleteTokens(keys []string, source string) error {
	defer s.tokensChanged()
	return s.update(source, "token.delete", fmt.Sprintf("%d token(s) revoked", len(keys)), func(tx *bolt.Tx) error {
		b := tx.Bucket(bTokens)
		for _, k := range keys {
			if err := b.Delete([]byte(k)); err != nil {
				return err
			}
		}
		return nil
	})
}

// DeleteToken removes a token (no error if absent).
func (s *Store) DeleteToken(key string, source string) error {
	defer s.tokensChanged()
	return s.update(source, "token.delete", "token revoked", func(tx *bolt.Tx) error {
		return tx.Bucket(bTokens).Delete([]byte(key))
	})
}

// tokenGens holds each open file's count of token deletions (shared by
// borrowed handles, like the group commit).
var tokenGens sync.Map // *bolt.DB → *atomic.Uint64

func (s *Store) tokenGen() *atomic.Uint64 {
	if g, ok := tokenGens.Load(s.db); ok {
		return g.(*atomic.Uint64)
	}
	g, _ := tokenGens.LoadOrStore(s.db, new(atomic.Uint64))
	return g.(*atomic.Uint64)
}

func (s *Store) tokensChanged() { s.tokenGen().Add(1) }

// TokenGeneration counts the token deletions made in this process through
// any handle on the file, so far. A caller that remembers tokens it has
// verified need only look in the store again when it has changed: this
// process holds the file, so nobody else can delete one.
func (s *Store) TokenGeneration() uint64 { return s.tokenGen().Load() }
