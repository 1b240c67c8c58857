package learner

import (
	"bytes"
	"strings"
	"testing"

	"handoff"
	"handoff/features"
)

func tinyMachine(t *testing.T) (*Machine, []handoff.Item) {
	t.Helper()
	texts := []string{"oil slick on the water", "dead fish and oil", "a heron by the bank", "two otters swimming",
		"plastic bags in the reeds", "cans and bottles", "oily sheen near the pipe", "kingfisher on a branch"}
	classes := []int{0, 0, 1, 1, 2, 2, 0, 1}
	v, err := features.DefaultTextConfig().Fit(texts)
	if err != nil {
		t.Fatal(err)
	}
	X := v.Transform(texts)
	tg := make([][]float64, len(texts))
	items := make([]handoff.Item, len(texts))
	for i, c := range classes {
		tg[i] = make([]float64, 3)
		tg[i][c] = 1
		items[i] = handoff.Item{ID: string(rune('a' + i)), Kind: handoff.KindText, Text: texts[i]}
	}
	mod, err := Logistic{Lambda: 0.1}.Fit(X, tg, nil)
	if err != nil {
		t.Fatal(err)
	}
	// The codebook has a fourth class with no examples: Present maps the
	// model's three classes into it.
	return &Machine{Kind: handoff.KindText, Learner: "logistic", Classes: []string{"pollution", "wildlife", "litter", "other"},
		Present: []int{0, 1, 2}, Temperature: 0.8, Text: v, Model: mod, Fingerprint: "f", Name: "r1-test", Cutoff: 0.9}, items
}

func TestMachineFileRoundTrip(t *testing.T) {
	m, items := tinyMachine(t)
	want, err := m.Label(items)
	if err != nil {
		t.Fatal(err)
	}
	b, err := MarshalMachine(m)
	if err != nil {
		t.Fatal(err)
	}
	got, err := ReadMachine(bytes.NewReader(b))
	if err != nil {
		t.Fatal(err)
	}
	if got.Version() != "r1-test" || got.Threshold() != 0.9 || got.Temperature != 0.8 {
		t.Fatalf("read back %q %g %g", got.Version(), got.Threshold(), got.Temperature)
	}
	labels, err := got.Label(items)
	if err != nil {
		t.Fatal(err)
	}
	for i := range labels {
		if labels[i].Class != want[i].Class || labels[i].Confidence != want[i].Confidence {
			t.Fatalf("item %d: read-back machine says %v, original %v", i, labels[i], want[i])
		}
		if labels[i].Proba[3] != 0 {
			t.Fatalf("a class without training examples got probability %g", labels[i].Proba[3])
		}
	}
	b2, _ := MarshalMachine(got)
	if !bytes.Equal(b, b2) {
		t.Error("writing a machine read back gives different bytes")
	}
}

func TestMachineRefusals(t *testing.T) {
	m, _ := tinyMachine(t)
	if err := m.CheckClasses([]string{"pollution", "wildlife", "litter"}); err == nil || !strings.Contains(err.Error(), "codebook") {
		t.Errorf("another codebook: %v", err)
	}
	img := []handoff.Item{{ID: "x", Kind: handoff.KindImage, Path: "/nope.png"}}
	if _, err := m.Label(img); err == nil || !strings.Contains(err.Error(), "kind") {
		t.Errorf("image item for a text model: %v", err)
	}
	if _, err := ReadMachine(strings.NewReader("not a model")); err == nil {
		t.Error("garbage read as a model")
	}
}
