package sim

import (
	"bytes"
	"crypto/sha256"
	"encoding/hex"
	"fmt"
	"image"
	"image/color"
	"image/png"
	"math"
	"math/rand/v2"
	"os"
	"path/filepath"
	"runtime"
	"strconv"
	"sync"

	"handoff"
)

// ImageConfig sets the invented microscope scenario. Zero fields take the
// defaults shown.
type ImageConfig struct {
	Dir              string    // directory for the PNG files (required; created if missing)
	Magnifications   []int     // objective magnifications (default 10, 20, 40)
	PerMagnification int       // images per magnification (default 200)
	PerSlide         int       // images per slide (default 25); a slide is imaged at one magnification
	Shares           []float64 // true class shares in ParticleCodebook order (default 0.35, 0.25, 0.25, 0.15)
	Size             int       // image width and height in pixels (default 96)
}

func (c ImageConfig) withDefaults() ImageConfig {
	if len(c.Magnifications) == 0 {
		c.Magnifications = []int{10, 20, 40}
	}
	if c.PerMagnification == 0 {
		c.PerMagnification = 200
	}
	if c.PerSlide == 0 {
		c.PerSlide = 25
	}
	if len(c.Shares) == 0 {
		c.Shares = []float64{.35, .25, .25, .15}
	}
	if c.Size == 0 {
		c.Size = 96
	}
	return c
}

// ImageSet is the generated image scenario.
//
// Item IDs are "img-NNNN"; Path is the absolute path of "img-NNNN.png" in
// the configured directory and SHA256 the hex digest of its bytes. Parent is
// the slide ("slide-NN"), Position the image's place on it. Covariates:
// magnification ("10", "20", "40"), slide, stain ("violet" or "pink") and site
// (a river site code as in the text scenario).
//
// The true class mix is the same at every magnification by construction:
// within each magnification the class counts are the largest-remainder
// rounding of PerMagnification·share, identical for every magnification.
// Shares holds these shares per magnification, so a correction that takes any
// one magnification as the reference stratum rests on a true assumption.
type ImageSet struct {
	Items  []handoff.Item
	Truth  map[string]string    // item ID → true ParticleCodebook key
	Tasks  []Task               // crowd tasks; Stratum is the magnification
	Shares map[string][]float64 // magnification → true class shares, ParticleCodebook order
}

// ChainAsRod returns the probability that a chain looks like a rod to
// everybody at magnification mag: 0.5·(10/mag)^1.75, at most 0.5 — about 0.50
// at 10×, 0.15 at 20× and 0.044 at 40×.
func ChainAsRod(mag float64) float64 {
	return math.Min(0.5, 0.5*math.Pow(10/mag, 1.75))
}

// ImageBias returns the shared confusion of the particle classes per
// magnification (keys as in the magnification covariate): chain → rod with
// probability ChainAsRod(mag); rod → chain 0.03; debris → cell
// min(0.1, 0.1·10/mag); cell → debris 0.02; the rest stays on the diagonal.
// Rows and columns are in ParticleCodebook order (cell, chain, rod, debris).
func ImageBias(mags []int) Bias {
	b := Bias{}
	for _, m := range mags {
		mf := float64(m)
		cr := ChainAsRod(mf)
		dc := math.Min(0.1, 0.1*10/mf)
		b[strconv.Itoa(m)] = [][]float64{
			{0.98, 0, 0, 0.02},
			{0, 1 - cr, cr, 0},
			{0, 0.03, 0.97, 0},
			{dc, 0, 0, 1 - dc},
		}
	}
	return b
}

var stains = map[string][3]float64{ // absorbance per channel (R, G, B)
	"violet": {0.85, 1.45, 0.55},
	"pink":   {0.35, 1.25, 0.85},
}
var stainNames = []string{"violet", "pink"}

// RenderImages draws the particle images into cfg.Dir and returns them as
// items. Deterministic given cfg and seed: every image has its own generator
// seeded from seed and its index, so the files are byte-identical across runs
// (rendering uses all cores).
//
// Rendering: one particle near the centre, in micrometres, at 0.15·mag pixels
// per micrometre — a round cell (radius 2–3.2 µm, slightly oval), a chain of
// 3–5 beads (radius 1.0–1.4 µm, spaced 1.9–2.0 radii apart, gently
// curved), a rod (a capsule 4–8 µm between cap centres, radius 0.85–1.3 µm)
// or debris (an irregular polygon with darker inclusions) — plus a few small
// specks; 2×2 supersampled coverage; a Gaussian blur of σ = 0.35·(40/mag)^1.2
// µm times a focus factor in [0.85, 1.25] (so at 10× the beads of a chain
// merge); absorbance colour of the slide's stain (debris brownish) over an
// unevenly lit background; Gaussian noise (σ = 0.015).
func RenderImages(cfg ImageConfig, seed uint64) (*ImageSet, error) {
	cfg = cfg.withDefaults()
	if cfg.Dir == "" {
		return nil, fmt.Errorf("sim: images: no directory given for the PNG files")
	}
	if len(cfg.Shares) != len(ParticleCodebook().Classes) {
		return nil, fmt.Errorf("sim: images: %d shares, need %d (cell, chain, rod, debris)", len(cfg.Shares), len(ParticleCodebook().Classes))
	}
	for i, s := range cfg.Shares {
		if !(s >= 0) || math.IsInf(s, 0) {
			return nil, fmt.Errorf("sim: images: shares[%d] = %v, need a finite value ≥ 0", i, s)
		}
	}
	if cfg.PerMagnification < 1 || cfg.PerSlide < 1 || cfg.Size < 32 {
		return nil, fmt.Errorf("sim: images: per magnification %d and per slide %d must be ≥ 1 and size %d ≥ 32", cfg.PerMagnification, cfg.PerSlide, cfg.Size)
	}
	for _, m := range cfg.Magnifications {
		if m < 2 || m > 100 {
			return nil, fmt.Errorf("sim: images: magnification %d outside 2–100", m)
		}
	}
	dir, err := filepath.Abs(cfg.Dir)
	if err != nil {
		return nil, fmt.Errorf("sim: images: %w", err)
	}
	if err := os.MkdirAll(dir, 0o755); err != nil {
		return nil, fmt.Errorf("sim: images: %w", err)
	}

	pcb := ParticleCodebook()
	keys := pcb.Keys()
	counts := allocate(cfg.PerMagnification, cfg.Shares)
	r := newRand(seed, 0x13a6e)
	type job struct {
		idx, class, mag int
		stain           string
	}
	var jobs []job
	set := &ImageSet{Truth: map[string]string{}, Shares: map[string][]float64{}}
	slide := 0
	for _, mag := range cfg.Magnifications {
		classes := make([]int, 0, cfg.PerMagnification)
		for c, n := range counts {
			for range n {
				classes = append(classes, c)
			}
		}
		r.Shuffle(len(classes), func(i, j int) { classes[i], classes[j] = classes[j], classes[i] })
		sh := make([]float64, len(counts))
		for c, n := range counts {
			sh[c] = float64(n) / float64(cfg.PerMagnification)
		}
		ms := strconv.Itoa(mag)
		set.Shares[ms] = sh
		var stain, slideID, siteCode string
		for i, c := range classes {
			if i%cfg.PerSlide == 0 {
				slide++
				slideID = fmt.Sprintf("slide-%02d", slide)
				stain = pick(r, stainNames)
				rv := r.IntN(len(rivers))
				siteCode = fmt.Sprintf("%s-%02d", rivers[rv].code, 1+r.IntN(4))
			}
			idx := len(jobs)
			id := fmt.Sprintf("img-%04d", idx+1)
			jobs = append(jobs, job{idx: idx, class: c, mag: mag, stain: stain})
			set.Items = append(set.Items, handoff.Item{
				ID: id, Kind: handoff.KindImage, Path: filepath.Join(dir, id+".png"),
				Parent: slideID, Position: i % cfg.PerSlide,
				Covariates: map[string]string{"magnification": ms, "slide": slideID, "stain": stain, "site": siteCode},
			})
			set.Truth[id] = keys[c]
			set.Tasks = append(set.Tasks, Task{Item: id, Truth: keys[c], Stratum: ms})
		}
	}

	var wg sync.WaitGroup
	errs := make([]error, len(jobs))
	next := make(chan int)
	for range runtime.GOMAXPROCS(0) {
		wg.Add(1)
		go func() {
			defer wg.Done()
			var buf bytes.Buffer
			for i := range next {
				j := jobs[i]
				img := renderParticle(newRand(seed, 0x1b7a9e, uint64(j.idx)), j.class, float64(j.mag), cfg.Size, stains[j.stain])
				buf.Reset()
				enc := png.Encoder{CompressionLevel: png.BestSpeed}
				if err := enc.Encode(&buf, img); err != nil {
					errs[i] = err
					continue
				}
				sum := sha256.Sum256(buf.Bytes())
				set.Items[i].SHA256 = hex.EncodeToString(sum[:])
				errs[i] = os.WriteFile(set.Items[i].Path, buf.Bytes(), 0o644)
			}
		}()
	}
	for i := range jobs {
		next <- i
	}
	close(next)
	wg.Wait()
	for i, err := range errs {
		if err != nil {
			return nil, fmt.Errorf("sim: images: %s: %w", set.Items[i].Path, err)
		}
	}
	return set, nil
}

// shape is a particle in micrometres.
type shape struct {
	circles                [][3]float64 // cx, cy, r
	capsules               [][5]float64 // ax, ay, bx, by, r
	ellipse                []float64    // cx, cy, a, b, theta
	polygon                [][2]float64
	density                float64
	minX, minY, maxX, maxY float64
}

func (s *shape) grow(x, y, r float64) {
	s.minX, s.minY = math.Min(s.minX, x-r), math.Min(s.minY, y-r)
	s.maxX, s.maxY = math.Max(s.maxX, x+r), math.Max(s.maxY, y+r)
}

func (s *shape) inside(x, y float64) bool {
	if x < s.minX || x > s.maxX || y < s.minY || y > s.maxY {
		return false
	}
	for _, c := range s.circles {
		dx, dy := x-c[0], y-c[1]
		if dx*dx+dy*dy <= c[2]*c[2] {
			return true
		}
	}
	for _, c := range s.capsules {
		ax, ay, bx, by := c[0], c[1], c[2], c[3]
		vx, vy := bx-ax, by-ay
		t := clamp(((x-ax)*vx+(y-ay)*vy)/(vx*vx+vy*vy), 0, 1)
		dx, dy := x-(ax+t*vx), y-(ay+t*vy)
		if dx*dx+dy*dy <= c[4]*c[4] {
			return true
		}
	}
	if e := s.ellipse; e != nil {
		cs, sn := math.Cos(e[4]), math.Sin(e[4])
		u := ((x-e[0])*cs + (y-e[1])*sn) / e[2]
		v := (-(x-e[0])*sn + (y-e[1])*cs) / e[3]
		if u*u+v*v <= 1 {
			return true
		}
	}
	if p := s.polygon; p != nil {
		in := false
		for i, j := 0, len(p)-1; i < len(p); j, i = i, i+1 {
			if (p[i][1] > y) != (p[j][1] > y) && x < (p[j][0]-p[i][0])*(y-p[i][1])/(p[j][1]-p[i][1])+p[i][0] {
				in = !in
			}
		}
		return in
	}
	return false
}

func newShape(density float64) *shape {
	return &shape{density: density, minX: math.Inf(1), minY: math.Inf(1), maxX: math.Inf(-1), maxY: math.Inf(-1)}
}

// particle builds the shape of one particle of the given class centred near (cx, cy).
func particle(r *rand.Rand, class int, cx, cy float64) []*shape {
	theta := r.Float64() * 2 * math.Pi
	switch class {
	case 0: // round cell
		s := newShape(0.9 + 0.2*r.Float64())
		rad := 2 + 1.2*r.Float64()
		b := rad * (0.87 + 0.13*r.Float64())
		s.ellipse = []float64{cx, cy, rad, b, theta}
		s.grow(cx, cy, rad)
		return []*shape{s}
	case 1: // chain of beads
		s := newShape(0.9 + 0.2*r.Float64())
		n := 3 + categorical(r, []float64{.35, .4, .25})
		rad := 1 + 0.4*r.Float64()
		step := rad * (1.9 + 0.1*r.Float64())
		bend := 0.12 * r.NormFloat64()
		// start so that the chain is centred
		x, y := cx-math.Cos(theta)*step*float64(n-1)/2, cy-math.Sin(theta)*step*float64(n-1)/2
		dir := theta - bend*float64(n-1)/2
		for i := 0; i < n; i++ {
			rr := rad * (0.93 + 0.14*r.Float64())
			s.circles = append(s.circles, [3]float64{x, y, rr})
			s.grow(x, y, rr)
			x, y = x+math.Cos(dir)*step, y+math.Sin(dir)*step
			dir += bend
		}
		return []*shape{s}
	case 2: // rod
		s := newShape(0.9 + 0.2*r.Float64())
		l := 4 + 4*r.Float64()
		rad := 0.85 + 0.45*r.Float64()
		dx, dy := math.Cos(theta)*l/2, math.Sin(theta)*l/2
		s.capsules = append(s.capsules, [5]float64{cx - dx, cy - dy, cx + dx, cy + dy, rad})
		s.grow(cx-dx, cy-dy, rad)
		s.grow(cx+dx, cy+dy, rad)
		return []*shape{s}
	default: // debris
		s := newShape(0.55 + 0.3*r.Float64())
		n := 7 + r.IntN(5)
		rad := 1.5 + 2.5*r.Float64()
		for i := 0; i < n; i++ {
			a := theta + 2*math.Pi*float64(i)/float64(n) + 0.3*r.NormFloat64()/float64(n)
			rr := rad * (0.45 + 0.75*r.Float64())
			x, y := cx+rr*math.Cos(a), cy+rr*math.Sin(a)
			s.polygon = append(s.polygon, [2]float64{x, y})
			s.grow(x, y, 0)
		}
		out := []*shape{s}
		for range 1 + r.IntN(3) {
			in := newShape(0.5)
			x, y := cx+0.5*rad*(r.Float64()-0.5), cy+0.5*rad*(r.Float64()-0.5)
			rr := 0.3 + 0.4*r.Float64()
			in.circles = append(in.circles, [3]float64{x, y, rr})
			in.grow(x, y, rr)
			out = append(out, in)
		}
		return out
	}
}

// renderParticle draws one image (see RenderImages).
func renderParticle(r *rand.Rand, class int, mag float64, size int, stain [3]float64) *image.NRGBA {
	ppu := 0.15 * mag // pixels per micrometre
	half := float64(size) / 2 / ppu
	jit := 0.08 * float64(size) / ppu
	shapes := particle(r, class, jit*(2*r.Float64()-1), jit*(2*r.Float64()-1))
	for range r.IntN(4) { // specks away from the centre
		s := newShape(0.4 + 0.4*r.Float64())
		a, d := 2*math.Pi*r.Float64(), half*(0.55+0.4*r.Float64())
		rr := 0.25 + 0.3*r.Float64()
		s.circles = append(s.circles, [3]float64{d * math.Cos(a), d * math.Sin(a), rr})
		s.grow(d*math.Cos(a), d*math.Sin(a), rr)
		shapes = append(shapes, s)
	}

	// supersampled optical density
	const ss = 2
	dens := make([]float64, size*size)
	for _, s := range shapes {
		x0 := max(0, int(math.Floor(s.minX*ppu+float64(size)/2))-1)
		x1 := min(size-1, int(math.Ceil(s.maxX*ppu+float64(size)/2))+1)
		y0 := max(0, int(math.Floor(s.minY*ppu+float64(size)/2))-1)
		y1 := min(size-1, int(math.Ceil(s.maxY*ppu+float64(size)/2))+1)
		for py := y0; py <= y1; py++ {
			for px := x0; px <= x1; px++ {
				hit := 0
				for sy := 0; sy < ss; sy++ {
					for sx := 0; sx < ss; sx++ {
						x := (float64(px) + (float64(sx)+0.5)/ss - float64(size)/2) / ppu
						y := (float64(py) + (float64(sy)+0.5)/ss - float64(size)/2) / ppu
						if s.inside(x, y) {
							hit++
						}
					}
				}
				dens[py*size+px] += s.density * float64(hit) / (ss * ss)
			}
		}
	}
	sigma := 0.35 * math.Pow(40/mag, 1.2) * (0.85 + 0.4*r.Float64()) * ppu
	dens = gaussianBlur(dens, size, sigma)

	absorb := stain
	if class == 3 {
		absorb = [3]float64{0.7 + 0.1*r.Float64(), 0.85, 1.1 + 0.2*r.Float64()}
	}
	strength := 0.9 + 0.3*r.Float64()
	gx, gy := 0.08*r.NormFloat64(), 0.08*r.NormFloat64()
	bg := [3]float64{0.92 + 0.03*r.Float64(), 0.91 + 0.03*r.Float64(), 0.86 + 0.04*r.Float64()}
	img := image.NewNRGBA(image.Rect(0, 0, size, size))
	for py := 0; py < size; py++ {
		for px := 0; px < size; px++ {
			u, v := float64(px)/float64(size)-0.5, float64(py)/float64(size)-0.5
			light := 1 + gx*u + gy*v - 0.1*(u*u+v*v)
			d := dens[py*size+px] * strength
			var c [3]uint8
			for ch := 0; ch < 3; ch++ {
				t := 1.0
				if d > 1e-4 {
					t = math.Exp(-d * absorb[ch])
				}
				val := bg[ch]*light*t + 0.015*r.NormFloat64()
				c[ch] = uint8(math.Round(255 * clamp(val, 0, 1)))
			}
			img.SetNRGBA(px, py, color.NRGBA{c[0], c[1], c[2], 255})
		}
	}
	return img
}

// gaussianBlur convolves a size×size field with a separable Gaussian of the
// given σ in pixels (kernel radius ⌈3σ⌉, edges clamped).
func gaussianBlur(src []float64, size int, sigma float64) []float64 {
	rad := int(math.Ceil(3 * sigma))
	if rad < 1 {
		return src
	}
	k := make([]float64, 2*rad+1)
	var sum float64
	for i := range k {
		x := float64(i - rad)
		k[i] = math.Exp(-x * x / (2 * sigma * sigma))
		sum += k[i]
	}
	for i := range k {
		k[i] /= sum
	}
	tmp := make([]float64, len(src))
	dst := make([]float64, len(src))
	for y := 0; y < size; y++ {
		for x := 0; x < size; x++ {
			var acc float64
			for i, w := range k {
				xx := min(size-1, max(0, x+i-rad))
				acc += w * src[y*size+xx]
			}
			tmp[y*size+x] = acc
		}
	}
	for y := 0; y < size; y++ {
		for x := 0; x < size; x++ {
			var acc float64
			for i, w := range k {
				yy := min(size-1, max(0, y+i-rad))
				acc += w * tmp[yy*size+x]
			}
			dst[y*size+x] = acc
		}
	}
	return dst
}
