package features

import (
	"fmt"
	"image"
	"image/color"
	"math"
)

// Gray is a grey image with intensities (nominally in [0,1]) stored row by
// row: pixel (x, y) — column x, row y, y growing downwards — is
// Pix[y*W+x]. len(Pix) == W*H.
type Gray struct {
	W, H int
	Pix  []float64
}

// NewGray returns a black w×h Gray.
func NewGray(w, h int) Gray { return Gray{W: w, H: h, Pix: make([]float64, w*h)} }

// At returns the intensity of pixel (x, y).
func (g Gray) At(x, y int) float64 { return g.Pix[y*g.W+x] }

// GrayOf returns the luma of img, Y = 0.299 R + 0.587 G + 0.114 B (ITU-R
// BT.601) with R, G, B in [0,1]. Colours are alpha-premultiplied, so
// transparent pixels read as black.
func GrayOf(img image.Image) Gray {
	b := img.Bounds()
	g := NewGray(b.Dx(), b.Dy())
	if p, ok := img.(*image.Gray); ok {
		for y := 0; y < g.H; y++ {
			row := p.Pix[(y+b.Min.Y-p.Rect.Min.Y)*p.Stride+(b.Min.X-p.Rect.Min.X):]
			for x := 0; x < g.W; x++ {
				g.Pix[y*g.W+x] = float64(row[x]) / 255
			}
		}
		return g
	}
	for y := 0; y < g.H; y++ {
		for x := 0; x < g.W; x++ {
			r, gg, bb, _ := img.At(b.Min.X+x, b.Min.Y+y).RGBA()
			g.Pix[y*g.W+x] = (0.299*float64(r) + 0.587*float64(gg) + 0.114*float64(bb)) / 0xffff
		}
	}
	return g
}

// Image returns g as an 8-bit grey image, intensities clamped to [0,1].
func (g Gray) Image() *image.Gray {
	out := image.NewGray(image.Rect(0, 0, g.W, g.H))
	for i, v := range g.Pix {
		out.Pix[i] = uint8(math.Round(255 * math.Max(0, math.Min(1, v))))
	}
	return out
}

// Quantize returns the grey level of each pixel, min(floor(v·levels),
// levels−1), clamped below at 0: levels equal bins over [0,1].
func Quantize(g Gray, levels int) []uint8 {
	if levels < 1 || levels > 256 {
		panic(fmt.Sprintf("features: %d grey levels, want 1..256", levels))
	}
	q := make([]uint8, len(g.Pix))
	for i, v := range g.Pix {
		k := int(v * float64(levels))
		if k >= levels {
			k = levels - 1
		}
		if k < 0 || v != v {
			k = 0
		}
		q[i] = uint8(k)
	}
	return q
}

// GLCM returns the symmetric grey-level co-occurrence counts of the w×h
// quantised image q (levels 0..levels−1, row by row) at offset (dx, dy):
// entry [a*levels+b] counts the pixel pairs p, p+(dx,dy) (both inside the
// image) with levels (a, b), plus the same pairs reversed, so the matrix is
// symmetric (Haralick, Shanmugam & Dinstein 1973). Angles follow
// scikit-image's graycomatrix, which pairs pixel (row r, column c) with
// (r + round(d·sin θ), c + round(d·cos θ)): with y growing downwards, 0°, 45°,
// 90°, 135° at distance 1 are (dx, dy) = (1,0), (1,1), (0,1), (−1,1). (On
// symmetric matrices 90° is the same either way up, and scikit-image's 45°
// and 135° are Haralick's 135° and 45°.)
func GLCM(q []uint8, w, h, dx, dy, levels int) []float64 {
	if len(q) != w*h {
		panic(fmt.Sprintf("features: GLCM of %d pixels for a %d×%d image", len(q), w, h))
	}
	p := make([]float64, levels*levels)
	glcmInto(p, q, w, h, dx, dy, levels)
	return p
}

func glcmInto(p []float64, q []uint8, w, h, dx, dy, levels int) {
	clear(p)
	x0, x1 := max(0, -dx), min(w, w-dx)
	y0, y1 := max(0, -dy), min(h, h-dy)
	for y := y0; y < y1; y++ {
		r, s := q[y*w:(y+1)*w], q[(y+dy)*w:(y+dy+1)*w]
		for x := x0; x < x1; x++ {
			a, b := int(r[x]), int(s[x+dx])
			if a >= levels || b >= levels {
				panic(fmt.Sprintf("features: grey level %d or %d not below %d", a, b, levels))
			}
			p[a*levels+b]++
			p[b*levels+a]++
		}
	}
}

// GLCMStats holds Haralick texture properties of a normalised co-occurrence
// matrix P (entries summing to 1), with the definitions of scikit-image's
// graycoprops:
//
//	Contrast      = Σ P(i,j) (i−j)²
//	Dissimilarity = Σ P(i,j) |i−j|
//	Homogeneity   = Σ P(i,j) / (1+(i−j)²)
//	ASM           = Σ P(i,j)²            (angular second moment)
//	Energy        = √ASM
//	Correlation   = Σ P(i,j) (i−μi)(j−μj) / (σi σj), and 1 when σi or σj < 1e-15
type GLCMStats struct {
	Contrast, Dissimilarity, Homogeneity, ASM, Energy, Correlation float64
}

// GLCMProps normalises the levels×levels matrix p (counts or
// probabilities) to sum 1 and returns its Haralick properties. An all-zero p
// gives zero properties with Correlation 1.
func GLCMProps(p []float64, levels int) GLCMStats {
	if len(p) != levels*levels {
		panic(fmt.Sprintf("features: GLCM of %d entries for %d levels", len(p), levels))
	}
	var sum float64
	for _, v := range p {
		sum += v
	}
	s := GLCMStats{Correlation: 1}
	if sum == 0 {
		return s
	}
	var mi, mj float64
	for i := 0; i < levels; i++ {
		for j := 0; j < levels; j++ {
			v := p[i*levels+j] / sum
			d := float64(i - j)
			s.Contrast += v * d * d
			s.Dissimilarity += v * math.Abs(d)
			s.Homogeneity += v / (1 + d*d)
			s.ASM += v * v
			mi += v * float64(i)
			mj += v * float64(j)
		}
	}
	var vi, vj, cov float64
	for i := 0; i < levels; i++ {
		for j := 0; j < levels; j++ {
			v := p[i*levels+j] / sum
			di, dj := float64(i)-mi, float64(j)-mj
			vi += v * di * di
			vj += v * dj * dj
			cov += v * di * dj
		}
	}
	s.Energy = math.Sqrt(s.ASM)
	if si, sj := math.Sqrt(vi), math.Sqrt(vj); si >= 1e-15 && sj >= 1e-15 {
		s.Correlation = cov / (si * sj)
	}
	return s
}

// Moments holds intensity-weighted image moments of a Gray: M00 = Σ I, the
// centroid (X, Y) = (Σ x I, Σ y I)/M00 in pixel indices, and the central
// moments Mu[p][q] = Σ (y−Y)^p (x−X)^q I for p+q ≤ 3 (p counts the row
// coordinate, q the column, as scikit-image's moments_central does).
type Moments struct {
	M00  float64
	X, Y float64
	Mu   [4][4]float64
}

// ImageMoments returns the moments of g. An image of zero total intensity
// gives M00 = 0, the centroid at the image centre and zero central moments.
func ImageMoments(g Gray) Moments {
	var m Moments
	var sx, sy float64
	for y := 0; y < g.H; y++ {
		row := g.Pix[y*g.W : (y+1)*g.W]
		var rs, rx float64
		for x, v := range row {
			rs += v
			rx += float64(x) * v
		}
		m.M00 += rs
		sx += rx
		sy += float64(y) * rs
	}
	if m.M00 == 0 {
		m.X, m.Y = float64(g.W-1)/2, float64(g.H-1)/2
		return m
	}
	m.X, m.Y = sx/m.M00, sy/m.M00
	for y := 0; y < g.H; y++ {
		dy := float64(y) - m.Y
		row := g.Pix[y*g.W : (y+1)*g.W]
		var s0, s1, s2, s3 float64 // Σ dx^k v over the row
		for x, v := range row {
			if v == 0 {
				continue
			}
			dx := float64(x) - m.X
			s0 += v
			s1 += dx * v
			s2 += dx * dx * v
			s3 += dx * dx * dx * v
		}
		dy2 := dy * dy
		m.Mu[0][0] += s0
		m.Mu[0][1] += s1
		m.Mu[0][2] += s2
		m.Mu[0][3] += s3
		m.Mu[1][0] += dy * s0
		m.Mu[1][1] += dy * s1
		m.Mu[1][2] += dy * s2
		m.Mu[2][0] += dy2 * s0
		m.Mu[2][1] += dy2 * s1
		m.Mu[3][0] += dy2 * dy * s0
	}
	return m
}

// Hu returns Hu's (1962) seven moment invariants from the normalised
// central moments η_pq = μ_pq / μ00^(1+(p+q)/2):
//
//	φ1 = η20 + η02
//	φ2 = (η20 − η02)² + 4η11²
//	φ3 = (η30 − 3η12)² + (3η21 − η03)²
//	φ4 = (η30 + η12)² + (η21 + η03)²
//	φ5 = (η30 − 3η12)(η30 + η12)[(η30 + η12)² − 3(η21 + η03)²] + (3η21 − η03)(η21 + η03)[3(η30 + η12)² − (η21 + η03)²]
//	φ6 = (η20 − η02)[(η30 + η12)² − (η21 + η03)²] + 4η11(η30 + η12)(η21 + η03)
//	φ7 = (3η21 − η03)(η30 + η12)[(η30 + η12)² − 3(η21 + η03)²] − (η30 − 3η12)(η21 + η03)[3(η30 + η12)² − (η21 + η03)²]
//
// (p indexes rows, as in scikit-image's moments_hu, which fixes φ7's sign).
// Zero total intensity gives all zeros.
func (m Moments) Hu() [7]float64 {
	var h [7]float64
	if m.M00 == 0 {
		return h
	}
	eta := func(p, q int) float64 { return m.Mu[p][q] / math.Pow(m.M00, 1+float64(p+q)/2) }
	n20, n02, n11 := eta(2, 0), eta(0, 2), eta(1, 1)
	n30, n03, n21, n12 := eta(3, 0), eta(0, 3), eta(2, 1), eta(1, 2)
	a, b := n30+n12, n21+n03
	h[0] = n20 + n02
	h[1] = (n20-n02)*(n20-n02) + 4*n11*n11
	h[2] = (n30-3*n12)*(n30-3*n12) + (3*n21-n03)*(3*n21-n03)
	h[3] = a*a + b*b
	h[4] = (n30-3*n12)*a*(a*a-3*b*b) + (3*n21-n03)*b*(3*a*a-b*b)
	h[5] = (n20-n02)*(a*a-b*b) + 4*n11*a*b
	h[6] = (3*n21-n03)*a*(a*a-3*b*b) - (n30-3*n12)*b*(3*a*a-b*b)
	return h
}

// HuMoments returns Hu's seven invariants of g (see Moments.Hu), unscaled.
func HuMoments(g Gray) [7]float64 { return ImageMoments(g).Hu() }

// RenderGray draws a w×h grid of intensities (row by row, values in [0,1],
// clamped; 0 is black) as a (w·scale)×(h·scale) 8-bit grey image, each value
// a scale×scale block. For the UCI digits (8×8, values 0–16), pass the
// values divided by 16.
func RenderGray(pixels []float64, w, h, scale int) image.Image {
	if len(pixels) != w*h || scale < 1 {
		panic(fmt.Sprintf("features: RenderGray of %d values as %d×%d at scale %d", len(pixels), w, h, scale))
	}
	img := image.NewGray(image.Rect(0, 0, w*scale, h*scale))
	for y := 0; y < h*scale; y++ {
		for x := 0; x < w*scale; x++ {
			v := math.Max(0, math.Min(1, pixels[(y/scale)*w+x/scale]))
			img.SetGray(x, y, color.Gray{Y: uint8(math.Round(255 * v))})
		}
	}
	return img
}
