// Package testproject builds small projects from the invented demo
// scenario (package sim) for the tests of the packages that work on a
// store (round, plan, export). Only tests import it.
package testproject

import (
	"path/filepath"
	"testing"

	"handoff"
	"handoff/sim"
	"handoff/store"
)

// Small builds a text project in dir/p from the invented demo scenario:
// about 800 sentences, 40% of them labelled by a simulated crowd at 5
// labels each, no gold. The store is closed when the test ends.
func Small(t testing.TB, dir string, seed uint64) (*store.Store, *sim.Demo) {
	t.Helper()
	d, err := sim.NewDemo(sim.DemoConfig{
		Dir:      filepath.Join(dir, "images"),
		Text:     sim.TextConfig{Reports: 200},
		Images:   sim.ImageConfig{PerMagnification: 20},
		Labelled: 0.4,
	}, seed)
	if err != nil {
		t.Fatal(err)
	}
	st, err := store.Create(filepath.Join(dir, "p"), sim.TopicCodebook(), "test")
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() { st.Close() })
	items, labels, _ := d.Of(handoff.KindText)
	if _, err := st.PutItems(items, false, "test"); err != nil {
		t.Fatal(err)
	}
	if _, err := st.PutLabels(labels, "test"); err != nil {
		t.Fatal(err)
	}
	return st, d
}
