package store

import (
	"fmt"

	bolt "go.etcd.io/bbolt"
)

// PutState stores a named piece of project state (for example the held-out
// set or the stop set of the rounds) and records the change in the audit
// trail. name must be non-empty; data replaces what was stored under it.
func (s *Store) PutState(name string, data []byte, source string) error {
	if name == "" {
		panic("store: PutState with an empty name")
	}
	return s.update(source, "state.put", fmt.Sprintf("%s (%d bytes)", name, len(data)), func(tx *bolt.Tx) error {
		return tx.Bucket(bMeta).Put(stateKey(name), append([]byte(nil), data...))
	})
}

// State returns the project state stored under name, or an error wrapping
// ErrNotFound if none was stored.
func (s *Store) State(name string) ([]byte, error) { return s.get(bMeta, stateKey(name)) }

func stateKey(name string) []byte { return []byte("state/" + name) }
