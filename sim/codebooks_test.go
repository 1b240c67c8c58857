package sim

import (
	"bytes"
	"encoding/json"
	"reflect"
	"testing"

	"handoff"
)

func TestCodebooksValidate(t *testing.T) {
	spec := CrowdSpec{Classes: 3}
	for _, tc := range []struct {
		name    string
		cb      handoff.Codebook
		keys    []string
		ordinal bool
	}{
		{"topic", TopicCodebook(), []string{"pollution", "wildlife", "bank-damage", "litter", "other"}, false},
		{"urgency", UrgencyCodebook(), []string{"none", "low", "medium", "high"}, true},
		{"particle", ParticleCodebook(), []string{"cell", "chain", "rod", "debris"}, false},
		{"combined", CombinedCodebook(), []string{"pollution", "wildlife", "bank-damage", "litter", "other", "cell", "chain", "rod", "debris"}, false},
		{"spec", spec.Codebook(), []string{"c1", "c2", "c3"}, false},
	} {
		t.Run(tc.name, func(t *testing.T) {
			if err := tc.cb.Validate(); err != nil {
				t.Fatal(err)
			}
			if got := tc.cb.Keys(); !reflect.DeepEqual(got, tc.keys) {
				t.Errorf("keys %v, want %v", got, tc.keys)
			}
			if tc.cb.IsOrdinal() != tc.ordinal {
				t.Errorf("ordinal = %v, want %v", tc.cb.IsOrdinal(), tc.ordinal)
			}
			if tc.name != "spec" {
				for _, c := range tc.cb.Classes {
					if c.Description == "" || c.Name == "" {
						t.Errorf("class %q lacks a name or description", c.Key)
					}
				}
				if tc.cb.Instructions == "" {
					t.Error("no instructions")
				}
			}
			var buf bytes.Buffer
			if err := WriteCodebook(&buf, tc.cb); err != nil {
				t.Fatal(err)
			}
			var back handoff.Codebook
			if err := json.Unmarshal(buf.Bytes(), &back); err != nil {
				t.Fatal(err)
			}
			if !reflect.DeepEqual(back, tc.cb) {
				t.Errorf("written codebook reads back as %+v", back)
			}
		})
	}
}
