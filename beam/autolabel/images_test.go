package autolabel

import (
	"fmt"
	"image"
	"image/color"
	"image/png"
	"math/rand/v2"
	"os"
	"os/exec"
	"path/filepath"
	"slices"
	"strconv"
	"strings"
	"testing"

	"handoff"
	"handoff/learner"
)

// writePNG writes a 24×24 image whose pixels are red with probability
// share and blue otherwise, with noise (invented data for this test).
func writePNG(path string, share float64, rng *rand.Rand) error {
	img := image.NewRGBA(image.Rect(0, 0, 24, 24))
	for y := range 24 {
		for x := range 24 {
			n := uint8(rng.IntN(60))
			if rng.Float64() < share {
				img.Set(x, y, color.RGBA{R: 190 + n, G: n, B: n, A: 255})
			} else {
				img.Set(x, y, color.RGBA{R: n, G: n, B: 190 + n, A: 255})
			}
		}
	}
	f, err := os.Create(path)
	if err != nil {
		return err
	}
	if err := png.Encode(f, img); err != nil {
		f.Close()
		return err
	}
	return f.Close()
}

// TestPrismImagesMatchLoopAutolabel makes an image project with `loop`
// (training images listed in train.txt and labelled red or blue, 300
// archive images of mixed shares listed in archive.txt), runs a round,
// `loop autolabel --force` and `loop model export`, then runs the pipeline
// with Images over archive.txt — ids are the paths as written, relative to
// the list's folder, as `loop items add` takes them — and checks every
// label and confidence against loop's and Machine.Label's.
func TestPrismImagesMatchLoopAutolabel(t *testing.T) {
	pr := loopProject(t) // builds loop
	loop := filepath.Join(pr.dir, "loop")
	dir := t.TempDir()
	rng := rand.New(rand.NewPCG(7, 11))
	os.MkdirAll(filepath.Join(dir, "img"), 0o755)
	var train, arch, labels strings.Builder
	labels.WriteString("item,annotator,label\n")
	for i := range 80 {
		share, class := 0.9, "red"
		if i%2 == 1 {
			share, class = 0.1, "blue"
		}
		name := fmt.Sprintf("img/t%03d.png", i)
		if err := writePNG(filepath.Join(dir, name), share, rng); err != nil {
			t.Fatal(err)
		}
		fmt.Fprintln(&train, name)
		fmt.Fprintf(&labels, "%s,a1,%s\n", name, class)
	}
	fmt.Fprintln(&arch, "# archive images")
	for i := range 300 {
		name := fmt.Sprintf("img/a%03d.png", i)
		if err := writePNG(filepath.Join(dir, name), rng.Float64(), rng); err != nil {
			t.Fatal(err)
		}
		fmt.Fprintln(&arch, name)
	}
	for name, body := range map[string]string{"cb.yaml": "question: Which colour?\nclasses:\n  - {key: red}\n  - {key: blue}\n",
		"train.txt": train.String(), "archive.txt": arch.String(), "labels.csv": labels.String()} {
		if err := os.WriteFile(filepath.Join(dir, name), []byte(body), 0o644); err != nil {
			t.Fatal(err)
		}
	}
	pd, model, export := filepath.Join(dir, "proj"), filepath.Join(dir, "images.hom"), filepath.Join(dir, "export.jsonl")
	run := func(args ...string) {
		cmd := exec.Command(loop, args...)
		cmd.Dir = dir
		if out, err := cmd.CombinedOutput(); err != nil {
			t.Fatalf("loop %s: %v\n%s", strings.Join(args, " "), err, out)
		}
	}
	run("init", pd, "--codebook", filepath.Join(dir, "cb.yaml"))
	run("items", "add", pd, filepath.Join(dir, "train.txt"), filepath.Join(dir, "archive.txt"))
	run("labels", "add", pd, filepath.Join(dir, "labels.csv"))
	run("consensus", pd)
	run("round", pd)
	run("model", "export", pd, model)
	// The threshold splits the archive in two: the median of the model's
	// confidences on it (rounded), so that both sides are checked.
	var archive []handoff.Item
	for i := range 300 {
		name := fmt.Sprintf("img/a%03d.png", i)
		archive = append(archive, handoff.Item{ID: name, Kind: handoff.KindImage, Path: filepath.Join(dir, name)})
	}
	m0, err := learner.LoadMachine(model)
	if err != nil {
		t.Fatal(err)
	}
	pre, err := m0.Label(archive)
	if err != nil {
		t.Fatal(err)
	}
	confs := make([]float64, len(pre))
	for i, l := range pre {
		confs[i] = l.Confidence
	}
	slices.Sort(confs)
	imgThreshold, _ := strconv.ParseFloat(strconv.FormatFloat(confs[len(confs)/2], 'f', 6, 64), 64)
	run("autolabel", pd, "--force", "--threshold", fmt.Sprint(imgThreshold))
	run("export", pd, "--format", "jsonl", "--out", export)
	out := t.TempDir()
	runPrism(t, Config{Items: filepath.Join(dir, "archive.txt"), Images: true, Model: model,
		Threshold: imgThreshold, Out: out, Shards: 2, Batch: 64})
	labelsOut := readJSONL[Label](t, filepath.Join(out, "labels-*.jsonl"))
	people := readJSONL[peopleJSON](t, filepath.Join(out, "people-*.jsonl"))
	if len(labelsOut)+len(people) != 300 || len(labelsOut) < 30 || len(people) < 3 {
		t.Fatalf("%d labels + %d for people, want 300 items on both sides of the threshold", len(labelsOut), len(people))
	}
	t.Logf("%d images labelled, %d for people", len(labelsOut), len(people))
	loopRows := map[string]exportRow{}
	for _, r := range readJSONL[exportRow](t, export) {
		loopRows[r.Item] = r
	}
	for _, l := range labelsOut {
		r := loopRows[l.Item]
		if r.Source != "machine" || l.Class != r.Class || l.Confidence != r.Confidence || l.Model != r.Model {
			t.Fatalf("image %s: pipeline %s %.17g %s, loop autolabel %q %s %.17g %s",
				l.Item, l.Class, l.Confidence, l.Model, r.Source, r.Class, r.Confidence, r.Model)
		}
	}
	for _, p := range people {
		if r, ok := loopRows[p.ID]; !ok || r.Source != "" {
			t.Fatalf("image %s left for people by the pipeline; loop has %+v", p.ID, r)
		}
	}
	// Every confidence, both sides, equals Machine.Label's over the
	// archive images in one call.
	m, err := learner.LoadMachine(model)
	if err != nil {
		t.Fatal(err)
	}
	want, err := m.Label(archive)
	if err != nil {
		t.Fatal(err)
	}
	got := map[string]float64{}
	for _, l := range labelsOut {
		got[l.Item] = l.Confidence
	}
	for _, p := range people {
		got[p.ID] = p.Confidence
	}
	for _, w := range want {
		if c, ok := got[w.Item]; !ok || c != w.Confidence {
			t.Fatalf("image %s: pipeline confidence %.17g (found %v), Machine.Label %.17g", w.Item, c, ok, w.Confidence)
		}
	}
}
