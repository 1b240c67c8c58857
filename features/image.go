package features

import (
	"bytes"
	"errors"
	"fmt"
	"image"
	stddraw "image/draw"
	_ "image/gif" // register decoders
	_ "image/jpeg"
	_ "image/png"
	"math"
	"os"
	"strconv"

	_ "golang.org/x/image/bmp"
	"golang.org/x/image/draw"
	_ "golang.org/x/image/tiff"
	_ "golang.org/x/image/webp"
)

// ImageConfig says how images become dense rows of named features. It
// serialises to JSON so a model file can carry it; DefaultImageConfig gives
// the usual settings. Every image is first resized to Size×Size,
// alpha-premultiplied so that transparency reads as black: a square image
// whose side is k·Size by averaging k×k blocks (rounded to 8 bits), any other
// by bilinear resampling (golang.org/x/image/draw). Intensity I is the BT.601 luma (see GrayOf).
//
// The features, in the order of Names:
//
//   - colour: for each channel of R, G, B, H, S, V (all in [0,1]; hue as a
//     plain number, red = 0): mean, population standard deviation and the
//     10%, 50%, 90% quantiles (linear interpolation between order
//     statistics, numpy's default);
//   - colour index: mean(B) − mean(R) and mean(G) − mean(R);
//   - intensity histogram: the share of pixels in each of HistBins equal
//     bins over [0,1];
//   - moments of I: centroid x, y (as fractions of the side), the second
//     central moments μ20, μ02, μ11 divided by M00·Size², elongation
//     1 − λ2/λ1 of their eigenvalues (0 round, →1 a line) and orientation
//     ½·atan2(2μ11, μ20 − μ02) of the major axis in radians (x right, y down);
//     Hu's seven invariants, as sign(φ)·log10(1 + |φ|·10¹⁰) when LogHu, else
//     raw;
//   - light concentration: the radii around the intensity centroid holding
//     20% and 80% of the total intensity (pixel centres binned by distance in
//     ¼-pixel steps, as fractions of the side) and r80/r20 (r20 at least ½ px);
//   - asymmetry: Σ|I − I₁₈₀| / (2 Σ I), I₁₈₀ the image turned by 180° about
//     its centre (Conselice 2000 form, centre fixed);
//   - Gini coefficient of the intensities (Lotz, Primack & Madau 2004):
//     Σᵢ (2i − n − 1) Iᵢ / (mean(I) · n(n−1)), I sorted increasing, i from 1;
//   - GLCM texture at distance 1 and 0°, 45°, 90°, 135° on I quantised to
//     Levels levels (see GLCM, GLCMProps): contrast, dissimilarity,
//     homogeneity, ASM, energy, correlation;
//   - edges: the share of pixels whose Sobel gradient magnitude of I exceeds
//     EdgeThreshold, and the mean magnitude;
//   - oriented gradients: on a HOGGrid×HOGGrid grid of cells, the Sobel
//     magnitude summed into HOGBins unsigned orientation bins over [0°,180°),
//     the whole descriptor scaled to unit Euclidean norm.
//
// Every feature is finite for every image: a black image gives zeros where
// a ratio would divide by zero.
type ImageConfig struct {
	Size          int     `json:"size"`
	Levels        int     `json:"levels"`
	HistBins      int     `json:"hist_bins"`
	HOGBins       int     `json:"hog_bins"`
	HOGGrid       int     `json:"hog_grid"`
	EdgeThreshold float64 `json:"edge_threshold"`
	LogHu         bool    `json:"log_hu"`
}

// DefaultImageConfig returns Size 64, 8 GLCM levels, 16 histogram bins, 9
// orientation bins on a 2×2 grid, edge threshold 0.5 (a Sobel magnitude 0.5
// is a step of 1/8 of full scale; common practice, no source) and log-scaled
// Hu invariants.
func DefaultImageConfig() ImageConfig {
	return ImageConfig{Size: 64, Levels: 8, HistBins: 16, HOGBins: 9, HOGGrid: 2, EdgeThreshold: 0.5, LogHu: true}
}

// Validate reports the first setting that cannot work.
func (c ImageConfig) Validate() error {
	switch {
	case c.Size < 8 || c.Size > 1024:
		return fmt.Errorf("features: image size %d: want 8..1024", c.Size)
	case c.Levels < 2 || c.Levels > 256:
		return fmt.Errorf("features: %d GLCM levels: want 2..256", c.Levels)
	case c.HistBins < 1 || c.HistBins > 256:
		return fmt.Errorf("features: %d histogram bins: want 1..256", c.HistBins)
	case c.HOGBins < 1 || c.HOGBins > 36:
		return fmt.Errorf("features: %d orientation bins: want 1..36", c.HOGBins)
	case c.HOGGrid < 1 || c.HOGGrid > c.Size/2:
		return fmt.Errorf("features: orientation grid %d: want 1..%d", c.HOGGrid, c.Size/2)
	case !(c.EdgeThreshold >= 0) || math.IsInf(c.EdgeThreshold, 0):
		return fmt.Errorf("features: edge threshold %v: want a finite number >= 0", c.EdgeThreshold)
	}
	return nil
}

var glcmAngles = []struct {
	name   string
	dx, dy int
}{{"0", 1, 0}, {"45", 1, 1}, {"90", 0, 1}, {"135", -1, 1}} // scikit-image's angles; see GLCM

// Names returns the feature names in column order.
func (c ImageConfig) Names() []string {
	var n []string
	for _, ch := range []string{"r", "g", "b", "h", "s", "v"} {
		for _, s := range []string{"mean", "std", "q10", "q50", "q90"} {
			n = append(n, "colour_"+ch+"_"+s)
		}
	}
	n = append(n, "colour_b_minus_r", "colour_g_minus_r")
	for k := 0; k < c.HistBins; k++ {
		n = append(n, "hist_"+strconv.Itoa(k))
	}
	n = append(n, "centroid_x", "centroid_y", "moment_xx", "moment_yy", "moment_xy", "elongation", "orientation")
	for k := 1; k <= 7; k++ {
		n = append(n, "hu_"+strconv.Itoa(k))
	}
	n = append(n, "conc_r20", "conc_r80", "conc_ratio", "asymmetry", "gini")
	for _, a := range glcmAngles {
		for _, p := range []string{"contrast", "dissimilarity", "homogeneity", "asm", "energy", "correlation"} {
			n = append(n, "glcm_"+p+"_"+a.name)
		}
	}
	n = append(n, "edge_density", "edge_mean")
	for cy := 0; cy < c.HOGGrid; cy++ {
		for cx := 0; cx < c.HOGGrid; cx++ {
			for b := 0; b < c.HOGBins; b++ {
				n = append(n, fmt.Sprintf("hog_%d_%d_%d", cy, cx, b))
			}
		}
	}
	return n
}

// Decode decodes an image file's bytes (PNG, JPEG, GIF, BMP, TIFF or WebP);
// the error names the file.
func Decode(name string, data []byte) (image.Image, error) {
	img, _, err := image.Decode(bytes.NewReader(data))
	if err != nil {
		return nil, fmt.Errorf("features: decoding image %s: %w", name, err)
	}
	if b := img.Bounds(); b.Empty() {
		return nil, fmt.Errorf("features: image %s is empty (%d×%d)", name, b.Dx(), b.Dy())
	}
	return img, nil
}

// Features returns the feature row of one image (see ImageConfig). It
// panics if the configuration is invalid; it returns an error for an empty
// image.
func (c ImageConfig) Features(img image.Image) ([]float64, error) {
	if err := c.Validate(); err != nil {
		panic(err)
	}
	if img.Bounds().Empty() {
		return nil, errors.New("features: empty image")
	}
	s := newImageScratch(c)
	return s.features(img, make([]float64, 0, s.cols)), nil
}

// Transform returns the feature rows of imgs, one per image, in parallel
// over all GOMAXPROCS cores. The error names the index of an empty image.
func (c ImageConfig) Transform(imgs []image.Image) (*Dense, error) {
	return c.run(len(imgs), func(i int) (image.Image, error) {
		if imgs[i].Bounds().Empty() {
			return nil, fmt.Errorf("features: image %d is empty", i)
		}
		return imgs[i], nil
	})
}

// TransformBytes decodes and featurises encoded images (see Decode) in
// parallel; names (one per blob) only label errors.
func (c ImageConfig) TransformBytes(names []string, blobs [][]byte) (*Dense, error) {
	if len(names) != len(blobs) {
		panic(fmt.Sprintf("features: %d names for %d images", len(names), len(blobs)))
	}
	return c.run(len(blobs), func(i int) (image.Image, error) { return Decode(names[i], blobs[i]) })
}

// TransformFiles reads, decodes and featurises image files in parallel.
// The error names the first file (in order) that cannot be read or decoded.
func (c ImageConfig) TransformFiles(paths []string) (*Dense, error) {
	return c.run(len(paths), func(i int) (image.Image, error) {
		b, err := os.ReadFile(paths[i])
		if err != nil {
			return nil, fmt.Errorf("features: %w", err)
		}
		return Decode(paths[i], b)
	})
}

func (c ImageConfig) run(n int, get func(i int) (image.Image, error)) (*Dense, error) {
	if err := c.Validate(); err != nil {
		return nil, err
	}
	cols := len(c.Names())
	out := &Dense{NRows: n, NCols: cols, Data: make([]float64, n*cols)}
	errs := make([]error, n)
	workers := workerCount(n)
	scratch := make([]*imageScratch, workers)
	parallel(n, workers, func(w, lo, hi int) {
		if scratch[w] == nil {
			scratch[w] = newImageScratch(c)
		}
		for i := lo; i < hi; i++ {
			img, err := get(i)
			if err != nil {
				errs[i] = err
				continue
			}
			scratch[w].features(img, out.Data[i*cols:i*cols:(i+1)*cols])
		}
	})
	for _, err := range errs {
		if err != nil {
			return nil, err
		}
	}
	return out, nil
}

// imageScratch holds one goroutine's buffers.
type imageScratch struct {
	c       ImageConfig
	cols    int
	dst     *image.RGBA
	ch      [6][]float64 // r g b h s v
	gray    Gray
	sorted  []float64
	q       []uint8
	glcm    []float64
	gx, gy  []float64
	radial  []float64
	counts  [256]int32
	hog     []float64
	tmp     []float64
	scaler  draw.Scaler
	full    *image.RGBA
	boxSums []uint32
	sw, sh  int
}

func newImageScratch(c ImageConfig) *imageScratch {
	n := c.Size * c.Size
	s := &imageScratch{c: c, cols: len(c.Names())}
	s.dst = image.NewRGBA(image.Rect(0, 0, c.Size, c.Size))
	for k := range s.ch {
		s.ch[k] = make([]float64, n)
	}
	s.gray = NewGray(c.Size, c.Size)
	s.sorted = make([]float64, n)
	s.q = make([]uint8, n)
	s.glcm = make([]float64, c.Levels*c.Levels)
	s.gx, s.gy = make([]float64, n), make([]float64, n)
	s.radial = make([]float64, int(float64(c.Size)*math.Sqrt2*4)+2)
	s.hog = make([]float64, c.HOGGrid*c.HOGGrid*c.HOGBins)
	s.tmp = make([]float64, n)
	return s
}

// quantile returns the p-quantile of sorted x by linear interpolation
// between order statistics (numpy's default, Hyndman & Fan type 7).
func quantile(x []float64, p float64) float64 {
	pos := p * float64(len(x)-1)
	lo := int(pos)
	if lo >= len(x)-1 {
		return x[len(x)-1]
	}
	return x[lo] + (pos-float64(lo))*(x[lo+1]-x[lo])
}

// orderStat returns the k-th smallest (0-based) of values whose counts by
// byte value are in counts, as a fraction of 255.
func orderStat(counts *[256]int32, k int) float64 {
	c := 0
	for v := 0; v < 256; v++ {
		c += int(counts[v])
		if c > k {
			return float64(v) / 255
		}
	}
	return 1
}

// byteQuantile is quantile for 8-bit values given their counts.
func byteQuantile(counts *[256]int32, n int, p float64) float64 {
	pos := p * float64(n-1)
	lo := int(pos)
	a := orderStat(counts, lo)
	if lo >= n-1 {
		return a
	}
	b := orderStat(counts, lo+1)
	return a + (pos-float64(lo))*(b-a)
}

func meanStd(x []float64) (float64, float64) {
	var s float64
	for _, v := range x {
		s += v
	}
	m := s / float64(len(x))
	var ss float64
	for _, v := range x {
		ss += (v - m) * (v - m)
	}
	return m, math.Sqrt(ss / float64(len(x)))
}

// features appends the feature row of img to out and returns it.
func (s *imageScratch) features(img image.Image, out []float64) []float64 {
	c := s.c
	n := c.Size * c.Size
	sb := img.Bounds()
	if k := sb.Dx() / c.Size; k >= 1 && sb.Dx() == k*c.Size && sb.Dy() == k*c.Size {
		s.boxDown(img, k)
	} else {
		if s.scaler == nil || s.sw != sb.Dx() || s.sh != sb.Dy() {
			// A Scaler keeps its weights and buffers: build one per source size.
			s.sw, s.sh = sb.Dx(), sb.Dy()
			s.scaler = draw.BiLinear.NewScaler(c.Size, c.Size, s.sw, s.sh)
		}
		s.scaler.Scale(s.dst, s.dst.Rect, img, sb, draw.Src, nil)
	}
	pix := s.dst.Pix
	r, g, b, h, sat, v := s.ch[0], s.ch[1], s.ch[2], s.ch[3], s.ch[4], s.ch[5]
	I := s.gray.Pix
	for i := 0; i < n; i++ {
		R, G, B := float64(pix[4*i])/255, float64(pix[4*i+1])/255, float64(pix[4*i+2])/255
		r[i], g[i], b[i] = R, G, B
		I[i] = 0.299*R + 0.587*G + 0.114*B
		mx, mn := max(R, G, B), min(R, G, B)
		v[i] = mx
		d := mx - mn
		var hue, sa float64
		if mx > 0 {
			sa = d / mx
		}
		if d > 0 {
			switch mx {
			case R:
				hue = (G - B) / d
				if hue < 0 {
					hue += 6
				}
			case G:
				hue = (B-R)/d + 2
			default:
				hue = (R-G)/d + 4
			}
			hue /= 6
			if hue >= 1 {
				hue -= 1
			}
		}
		h[i], sat[i] = hue, sa
	}
	// colour
	var means [6]float64
	for k, x := range s.ch {
		m, sd := meanStd(x)
		means[k] = m
		out = append(out, m, sd)
		if k < 3 || k == 5 { // 8-bit values: quantiles from counts
			clear(s.counts[:])
			off := k
			if k == 5 {
				for i := 0; i < n; i++ {
					s.counts[max(pix[4*i], pix[4*i+1], pix[4*i+2])]++
				}
			} else {
				for i := 0; i < n; i++ {
					s.counts[pix[4*i+off]]++
				}
			}
			out = append(out, byteQuantile(&s.counts, n, 0.1), byteQuantile(&s.counts, n, 0.5), byteQuantile(&s.counts, n, 0.9))
			continue
		}
		sorted := append(s.sorted[:0], x...)
		sortNonNegative(sorted, s.tmp)
		out = append(out, quantile(sorted, 0.1), quantile(sorted, 0.5), quantile(sorted, 0.9))
	}
	out = append(out, means[2]-means[0], means[1]-means[0])
	// intensity histogram
	start := len(out)
	for k := 0; k < c.HistBins; k++ {
		out = append(out, 0)
	}
	for _, x := range I {
		k := min(int(x*float64(c.HistBins)), c.HistBins-1)
		out[start+max(k, 0)]++
	}
	for k := start; k < len(out); k++ {
		out[k] /= float64(n)
	}
	// moments
	mo := ImageMoments(s.gray)
	size := float64(c.Size)
	out = append(out, (mo.X+0.5)/size, (mo.Y+0.5)/size)
	var mxx, myy, mxy, elong, orient float64
	if mo.M00 > 0 {
		mxx = mo.Mu[0][2] / mo.M00 / (size * size)
		myy = mo.Mu[2][0] / mo.M00 / (size * size)
		mxy = mo.Mu[1][1] / mo.M00 / (size * size)
		tr, det := mxx+myy, mxx*myy-mxy*mxy
		disc := math.Sqrt(math.Max(0, tr*tr/4-det))
		l1, l2 := tr/2+disc, tr/2-disc
		if l1 > 0 {
			elong = 1 - math.Max(0, l2)/l1
		}
		orient = 0.5 * math.Atan2(2*mxy, mxx-myy)
	}
	out = append(out, mxx, myy, mxy, elong, orient)
	for _, phi := range mo.Hu() {
		if c.LogHu {
			a := math.Log10(1 + math.Abs(phi)*1e10)
			if phi < 0 {
				a = -a
			}
			phi = a
		}
		out = append(out, phi)
	}
	// light concentration
	clear(s.radial)
	for y := 0; y < c.Size; y++ {
		dy := float64(y) - mo.Y
		for x := 0; x < c.Size; x++ {
			dx := float64(x) - mo.X
			k := min(int(math.Sqrt(dx*dx+dy*dy)*4), len(s.radial)-1)
			s.radial[k] += I[y*c.Size+x]
		}
	}
	var r20, r80 float64
	if mo.M00 > 0 {
		cum, got20 := 0.0, false
		for k, w := range s.radial {
			cum += w
			if !got20 && cum >= 0.2*mo.M00 {
				r20, got20 = float64(k+1)/4, true
			}
			if cum >= 0.8*mo.M00*(1-1e-12) {
				r80 = float64(k+1) / 4
				break
			}
		}
	}
	ratio := 0.0
	if mo.M00 > 0 {
		ratio = r80 / math.Max(r20, 0.5)
	}
	out = append(out, r20/size, r80/size, ratio)
	// asymmetry and Gini
	var asym float64
	for i := 0; i < n; i++ {
		asym += math.Abs(I[i] - I[n-1-i])
	}
	if mo.M00 > 0 {
		asym /= 2 * mo.M00
	}
	sorted := append(s.sorted[:0], I...)
	sortNonNegative(sorted, s.tmp)
	var gini float64
	if mo.M00 > 0 && n > 1 {
		for i, x := range sorted {
			gini += float64(2*(i+1)-n-1) * x
		}
		gini /= (mo.M00 / float64(n)) * float64(n) * float64(n-1)
	}
	out = append(out, asym, gini)
	// GLCM
	s.quantize()
	for _, a := range glcmAngles {
		glcmInto(s.glcm, s.q, c.Size, c.Size, a.dx, a.dy, c.Levels)
		p := GLCMProps(s.glcm, c.Levels)
		out = append(out, p.Contrast, p.Dissimilarity, p.Homogeneity, p.ASM, p.Energy, p.Correlation)
	}
	// Sobel edges and oriented gradients
	s.sobel()
	var edges, magSum float64
	clear(s.hog)
	cell := float64(c.HOGGrid) / size
	for y := 0; y < c.Size; y++ {
		cy := int(float64(y) * cell)
		for x := 0; x < c.Size; x++ {
			i := y*c.Size + x
			gx, gy := s.gx[i], s.gy[i]
			m := math.Sqrt(gx*gx + gy*gy)
			if m == 0 {
				continue
			}
			magSum += m
			if m > c.EdgeThreshold {
				edges++
			}
			th := math.Atan2(gy, gx)
			if th < 0 {
				th += math.Pi
			}
			bin := min(int(th/math.Pi*float64(c.HOGBins)), c.HOGBins-1)
			cx := int(float64(x) * cell)
			s.hog[(cy*c.HOGGrid+cx)*c.HOGBins+bin] += m
		}
	}
	out = append(out, edges/float64(n), magSum/float64(n))
	var ss float64
	for _, x := range s.hog {
		ss += x * x
	}
	for _, x := range s.hog {
		if ss > 0 {
			x /= math.Sqrt(ss)
		}
		out = append(out, x)
	}
	if len(out) != s.cols {
		panic(fmt.Sprintf("features: %d image features for %d names", len(out), s.cols))
	}
	return out
}

// boxDown writes into s.dst the k×k block means of img, whose side is k
// times Size (area averaging, the exact resampling for an integer factor),
// after converting it to premultiplied RGBA.
func (s *imageScratch) boxDown(img image.Image, k int) {
	b := img.Bounds()
	src, ok := img.(*image.RGBA)
	if !ok || k > 1 {
		if !ok {
			if s.full == nil || s.full.Rect.Size() != b.Size() {
				s.full = image.NewRGBA(image.Rect(0, 0, b.Dx(), b.Dy()))
			}
			stddraw.Draw(s.full, s.full.Rect, img, b.Min, stddraw.Src)
			src = s.full
		}
	}
	N := s.c.Size
	if k == 1 {
		for y := 0; y < N; y++ {
			o := src.PixOffset(src.Rect.Min.X, src.Rect.Min.Y+y)
			copy(s.dst.Pix[y*s.dst.Stride:y*s.dst.Stride+4*N], src.Pix[o:o+4*N])
		}
		return
	}
	area := uint32(k * k)
	if len(s.boxSums) != 4*N {
		s.boxSums = make([]uint32, 4*N)
	}
	sums := s.boxSums
	for y := 0; y < N; y++ {
		clear(sums)
		for dy := 0; dy < k; dy++ {
			o := src.PixOffset(src.Rect.Min.X, src.Rect.Min.Y+y*k+dy)
			row := src.Pix[o : o+4*N*k]
			for x := 0; x < N; x++ {
				px := row[4*k*x : 4*k*(x+1)]
				for i := 0; i < len(px); i += 4 {
					sums[4*x] += uint32(px[i])
					sums[4*x+1] += uint32(px[i+1])
					sums[4*x+2] += uint32(px[i+2])
					sums[4*x+3] += uint32(px[i+3])
				}
			}
		}
		d := s.dst.Pix[y*s.dst.Stride : y*s.dst.Stride+4*N]
		for i, v := range sums {
			d[i] = uint8((v + area/2) / area) // rounded mean
		}
	}
}

func (s *imageScratch) quantize() {
	L := s.c.Levels
	for i, v := range s.gray.Pix {
		s.q[i] = uint8(max(0, min(int(v*float64(L)), L-1)))
	}
}

// sobel fills gx, gy with the Sobel derivatives of the intensity, the border
// replicated: gx = [−1 0 1; −2 0 2; −1 0 1] ⋆ I, gy its transpose (y down).
func (s *imageScratch) sobel() {
	N := s.c.Size
	I := s.gray.Pix
	at := func(x, y int) float64 {
		return I[max(0, min(y, N-1))*N+max(0, min(x, N-1))]
	}
	for y := 0; y < N; y++ {
		for x := 0; x < N; x++ {
			var a, b, c, d, f, g, h, k float64
			if x > 0 && y > 0 && x < N-1 && y < N-1 {
				a, b, c = I[(y-1)*N+x-1], I[(y-1)*N+x], I[(y-1)*N+x+1]
				d, f = I[y*N+x-1], I[y*N+x+1]
				g, h, k = I[(y+1)*N+x-1], I[(y+1)*N+x], I[(y+1)*N+x+1]
			} else {
				a, b, c = at(x-1, y-1), at(x, y-1), at(x+1, y-1)
				d, f = at(x-1, y), at(x+1, y)
				g, h, k = at(x-1, y+1), at(x, y+1), at(x+1, y+1)
			}
			s.gx[y*N+x] = (c + 2*f + k) - (a + 2*d + g)
			s.gy[y*N+x] = (g + 2*h + k) - (a + 2*b + c)
		}
	}
}

// sortNonNegative sorts x (non-negative, not NaN) in increasing order by a
// least-significant-digit radix sort on the bits of float32(v), which order
// like the values for non-negative numbers. Values closer than float32
// resolution (relative 6e-8) may keep their input order; values derived from
// 8-bit channels (luma, hue, saturation) are always further apart, so for
// them the order is exact. tmp has len(x).
func sortNonNegative(x, tmp []float64) {
	var counts [256]int
	src, dst := x, tmp[:len(x)]
	for shift := uint(0); shift < 32; shift += 8 {
		clear(counts[:])
		for _, v := range src {
			counts[byte(math.Float32bits(float32(v))>>shift)]++
		}
		if counts[byte(math.Float32bits(float32(src[0]))>>shift)] == len(src) {
			continue // every key has this byte: the pass would not move anything
		}
		sum := 0
		for k, c := range counts {
			counts[k] = sum
			sum += c
		}
		for _, v := range src {
			b := byte(math.Float32bits(float32(v)) >> shift)
			dst[counts[b]] = v
			counts[b]++
		}
		src, dst = dst, src
	}
	if &src[0] != &x[0] {
		copy(x, src)
	}
}

// CheckNames reports whether names (for example those stored with a model's
// Scaler) are exactly this configuration's feature names in order, and if
// not, where they first differ — so that a model file written by another
// version of the features is refused instead of silently misread.
func (c ImageConfig) CheckNames(names []string) error {
	want := c.Names()
	for j := 0; j < min(len(names), len(want)); j++ {
		if names[j] != want[j] {
			return fmt.Errorf("features: image feature %d is %q in the model but %q here; refit the model", j, names[j], want[j])
		}
	}
	if len(names) != len(want) {
		return fmt.Errorf("features: the model has %d image features, this configuration makes %d; refit the model", len(names), len(want))
	}
	return nil
}
