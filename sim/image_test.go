package sim

import (
	"bytes"
	"crypto/sha256"
	"encoding/hex"
	"image"
	"image/png"
	"math"
	"os"
	"path/filepath"
	"reflect"
	"sort"
	"strconv"
	"testing"
)

func smallImages(t *testing.T, dir string, seed uint64) *ImageSet {
	t.Helper()
	is, err := RenderImages(ImageConfig{Dir: dir, PerMagnification: 24, PerSlide: 8, Size: 64}, seed)
	if err != nil {
		t.Fatal(err)
	}
	return is
}

func TestImagesDeterministicAndDecode(t *testing.T) {
	d1, d2, d3 := t.TempDir(), t.TempDir(), t.TempDir()
	a, b, c := smallImages(t, d1, 5), smallImages(t, d2, 5), smallImages(t, d3, 6)
	if len(a.Items) != 72 {
		t.Fatalf("%d images, want 72", len(a.Items))
	}
	differ := 0
	for i, it := range a.Items {
		if err := it.Validate(); err != nil {
			t.Fatalf("%s: %v", it.ID, err)
		}
		if !filepath.IsAbs(it.Path) || filepath.Dir(it.Path) != d1 {
			t.Fatalf("%s: path %q not absolute in %s", it.ID, it.Path, d1)
		}
		raw, err := os.ReadFile(it.Path)
		if err != nil {
			t.Fatal(err)
		}
		sum := sha256.Sum256(raw)
		if hex.EncodeToString(sum[:]) != it.SHA256 {
			t.Fatalf("%s: SHA256 does not match the file", it.ID)
		}
		img, err := png.Decode(bytes.NewReader(raw))
		if err != nil {
			t.Fatalf("%s: %v", it.ID, err)
		}
		if img.Bounds() != image.Rect(0, 0, 64, 64) {
			t.Fatalf("%s: bounds %v", it.ID, img.Bounds())
		}
		raw2, _ := os.ReadFile(b.Items[i].Path)
		if !bytes.Equal(raw, raw2) || b.Items[i].SHA256 != it.SHA256 {
			t.Fatalf("%s: same seed gave different bytes", it.ID)
		}
		if c.Items[i].SHA256 != it.SHA256 {
			differ++
		}
		if it.Parent != it.Covariates["slide"] || it.Covariates["magnification"] == "" || it.Covariates["stain"] == "" {
			t.Fatalf("%s: covariates %v, parent %q", it.ID, it.Covariates, it.Parent)
		}
	}
	if differ < len(a.Items)-1 {
		t.Errorf("a different seed changed only %d of %d images", differ, len(a.Items))
	}
	strip := func(s *ImageSet) *ImageSet {
		x := *s
		x.Items = nil
		return &x
	}
	if !reflect.DeepEqual(strip(a), strip(b)) {
		t.Error("same seed gave different truth or tasks")
	}
}

// The true class mix is the same in every magnification stratum.
func TestImageSharesEqualAcrossStrata(t *testing.T) {
	is, err := RenderImages(ImageConfig{Dir: t.TempDir(), PerMagnification: 50, Size: 32, Magnifications: []int{10, 20, 40, 60}}, 2)
	if err != nil {
		t.Fatal(err)
	}
	count := map[string]map[string]float64{}
	for _, it := range is.Items {
		m := it.Covariates["magnification"]
		if count[m] == nil {
			count[m] = map[string]float64{}
		}
		count[m][is.Truth[it.ID]]++
	}
	pcb := ParticleCodebook()
	keys := pcb.Keys()
	shares := []float64{.35, .25, .25, .15} // the default
	for _, m := range []string{"10", "20", "40", "60"} {
		for c, k := range keys {
			got := count[m][k] / 50
			if got != count["10"][k]/50 || math.Abs(got-shares[c]) > 1.0/50 || math.Abs(is.Shares[m][c]-got) > 1e-12 {
				t.Errorf("magnification %s class %s: share %.3f (reported %.3f), want %.3f as at 10×, within 0.02 of %.2f",
					m, k, got, is.Shares[m][c], count["10"][k]/50, shares[c])
			}
		}
	}
}

// beadedness measures how far a particle pinches in along its long axis: the
// optical density of the region around the centre is summed across the axis
// (each pixel split linearly between two bins) and beadedness is
// 1 − min/max of that profile over the middle 70% of the particle's length.
// Rods score low; well-resolved chains high, their waists showing as dips.
func beadedness(img *image.NRGBA) float64 {
	n := img.Bounds().Dx()
	od := make([]float64, n*n)
	var border []float64
	for y := 0; y < n; y++ {
		for x := 0; x < n; x++ {
			c := img.NRGBAAt(x, y)
			l := (float64(c.R) + float64(c.G) + float64(c.B)) / 3
			od[y*n+x] = l
			if x == 0 || y == 0 || x == n-1 || y == n-1 {
				border = append(border, l)
			}
		}
	}
	sort.Float64s(border)
	bg := border[len(border)/2]
	best, start := -1.0, 0
	for i, l := range od {
		od[i] = -math.Log(math.Max(l, 1) / bg)
		x, y := i%n-n/2, i/n-n/2
		if x*x+y*y < n*n/16 && od[i] > best {
			best, start = od[i], i
		}
	}
	// flood fill the region denser than 15% of the peak
	mask := make([]bool, n*n)
	stack := []int{start}
	mask[start] = true
	var pts []int
	for len(stack) > 0 {
		i := stack[len(stack)-1]
		stack = stack[:len(stack)-1]
		pts = append(pts, i)
		x, y := i%n, i/n
		for _, d := range [][2]int{{1, 0}, {-1, 0}, {0, 1}, {0, -1}} {
			xx, yy := x+d[0], y+d[1]
			j := yy*n + xx
			if xx >= 0 && yy >= 0 && xx < n && yy < n && !mask[j] && od[j] > 0.15*best {
				mask[j] = true
				stack = append(stack, j)
			}
		}
	}
	var w, mx, my float64
	for _, i := range pts {
		w += od[i]
		mx += od[i] * float64(i%n)
		my += od[i] * float64(i/n)
	}
	mx, my = mx/w, my/w
	var sxx, syy, sxy float64
	for _, i := range pts {
		dx, dy := float64(i%n)-mx, float64(i/n)-my
		sxx += od[i] * dx * dx
		syy += od[i] * dy * dy
		sxy += od[i] * dx * dy
	}
	theta := 0.5 * math.Atan2(2*sxy, sxx-syy)
	ux, uy := math.Cos(theta), math.Sin(theta)
	prof := make([]float64, 2*n+2)
	for _, i := range pts {
		s := (float64(i%n)-mx)*ux + (float64(i/n)-my)*uy + float64(n)
		f := math.Floor(s)
		prof[int(f)] += od[i] * (1 - (s - f))
		prof[int(f)+1] += od[i] * (s - f)
	}
	peak := 0.0
	for _, v := range prof {
		peak = math.Max(peak, v)
	}
	lo, hi := -1, -1
	for i, v := range prof {
		if v >= 0.5*peak {
			if lo < 0 {
				lo = i
			}
			hi = i
		}
	}
	cut := int(math.Round(0.15 * float64(hi-lo)))
	mn, mxv := math.Inf(1), 0.0
	for i := lo + cut; i <= hi-cut; i++ {
		mn, mxv = math.Min(mn, prof[i]), math.Max(mxv, prof[i])
	}
	if mxv == 0 {
		return 0
	}
	return 1 - mn/mxv
}

// In pixels, chains at 10× lose the waists between their beads and look like
// rods, while at 40× the waists are plain.
func TestChainsLookLikeRodsAtLowMagnification(t *testing.T) {
	med := map[string]float64{}
	for _, mag := range []float64{10, 40} {
		for class, name := range map[int]string{1: "chain", 2: "rod"} {
			var bs []float64
			for i := range 40 {
				img := renderParticle(newRand(99, uint64(i), uint64(class), uint64(mag)), class, mag, 96, stains["violet"])
				bs = append(bs, beadedness(img))
			}
			sort.Float64s(bs)
			med[name+strconv.Itoa(int(mag))] = bs[len(bs)/2]
		}
	}
	if med["chain40"] < med["rod40"]+0.2 {
		t.Errorf("at 40× chains should pinch in: median beadedness chain %.2f, rod %.2f", med["chain40"], med["rod40"])
	}
	if gap10, gap40 := math.Abs(med["chain10"]-med["rod10"]), med["chain40"]-med["rod40"]; gap10 > 0.1 || gap10 > gap40/2 {
		t.Errorf("at 10× chains should look like rods: median beadedness chain %.2f, rod %.2f (at 40×: %.2f, %.2f)",
			med["chain10"], med["rod10"], med["chain40"], med["rod40"])
	}
}

func TestImageConfigErrors(t *testing.T) {
	for _, tc := range []struct {
		name string
		cfg  ImageConfig
	}{
		{"no dir", ImageConfig{}},
		{"shares", ImageConfig{Dir: t.TempDir(), Shares: []float64{1, 2}}},
		{"negative share", ImageConfig{Dir: t.TempDir(), Shares: []float64{1, -1, 1, 1}}},
		{"NaN share", ImageConfig{Dir: t.TempDir(), Shares: []float64{1, math.NaN(), 1, 1}}},
		{"magnification", ImageConfig{Dir: t.TempDir(), Magnifications: []int{0}}},
		{"size", ImageConfig{Dir: t.TempDir(), Size: 8}},
	} {
		if _, err := RenderImages(tc.cfg, 1); err == nil {
			t.Errorf("%s: no error", tc.name)
		}
	}
}

func TestImageBiasRows(t *testing.T) {
	b := ImageBias([]int{10, 20, 40})
	if err := b.check(4); err != nil {
		t.Fatal(err)
	}
	if b["10"][1][2] <= b["20"][1][2] || b["20"][1][2] <= b["40"][1][2] {
		t.Errorf("chain → rod should fall with magnification: %v %v %v", b["10"][1][2], b["20"][1][2], b["40"][1][2])
	}
}
