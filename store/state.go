package store

// State returns the project state stored under name, or an error wrapping
// ErrNotFound if none was stored.
func (s *Store) State(name string) ([]byte, error) { return s.get(bMeta, stateKey(name)) }

func stateKey(name string) []byte { return []byte("state/" + name) }
