package features

import (
	"math"
	"reflect"
	"testing"
)

// haralickFig2 is the 4×4 test image of Haralick, Shanmugam & Dinstein
// (1973), "Textural Features for Image Classification", IEEE Trans. SMC-3(6),
// Fig. 2, grey levels 0–3.
var haralickFig2 = []uint8{
	0, 0, 1, 1,
	0, 0, 1, 1,
	0, 2, 2, 2,
	2, 2, 3, 3,
}

// TestGLCMHaralickFig2 checks the symmetric co-occurrence counts at distance
// 1 against Haralick, Shanmugam & Dinstein (1973), "Textural features for
// image classification", IEEE Trans. SMC 3(6), Fig. 2 (copied into
// testdata/README.md).
func TestGLCMHaralickFig2(t *testing.T) {
	tests := []struct {
		angle  string
		dx, dy int
		want   []float64
	}{
		{"0°", 1, 0, []float64{4, 2, 1, 0, 2, 4, 0, 0, 1, 0, 6, 1, 0, 0, 1, 2}},
		{"90°", 0, -1, []float64{6, 0, 2, 0, 0, 4, 2, 0, 2, 2, 2, 2, 0, 0, 2, 0}},
	}
	for _, tc := range tests {
		if got := GLCM(haralickFig2, 4, 4, tc.dx, tc.dy, 4); !reflect.DeepEqual(got, tc.want) {
			t.Errorf("%s: GLCM = %v, want %v", tc.angle, got, tc.want)
		}
	}
	// The 45° and 135° directions follow scikit-image 0.19.3: graycomatrix of
	// [[0,1],[2,3]] at distance 1 counts only the pair (0,3) at π/4 and only
	// (1,2) at 3π/4 (run on Debian 12's python3-skimage); symmetric adds the
	// reverse pairs.
	two := []uint8{0, 1, 2, 3}
	if got := GLCM(two, 2, 2, 1, 1, 4); got[0*4+3] != 1 || got[3*4+0] != 1 || sum(got) != 2 {
		t.Errorf("45°: %v, want only (0,3) and (3,0)", got)
	}
	if got := GLCM(two, 2, 2, -1, 1, 4); got[1*4+2] != 1 || got[2*4+1] != 1 || sum(got) != 2 {
		t.Errorf("135°: %v, want only (1,2) and (2,1)", got)
	}
	// Symmetric counts do not depend on the offset's sign.
	if a, b := GLCM(haralickFig2, 4, 4, 1, -1, 4), GLCM(haralickFig2, 4, 4, -1, 1, 4); !reflect.DeepEqual(a, b) {
		t.Errorf("45° counts differ by offset sign: %v vs %v", a, b)
	}
}

// TestGLCMPropsScikitImage checks the properties of the normalised 0° matrix
// of Haralick's Fig. 2 image against scikit-image 0.19.3 graycoprops
// (copied into testdata/README.md) to 1e-6.
func TestGLCMPropsScikitImage(t *testing.T) {
	s := GLCMProps(GLCM(haralickFig2, 4, 4, 1, 0, 4), 4)
	for _, c := range []struct {
		name      string
		got, want float64
	}{
		{"contrast", s.Contrast, 0.583333},
		{"dissimilarity", s.Dissimilarity, 0.416667},
		{"homogeneity", s.Homogeneity, 0.808333},
		{"ASM", s.ASM, 0.145833},
		{"energy", s.Energy, 0.381881},
		{"correlation", s.Correlation, 0.719533},
	} {
		if math.Abs(c.got-c.want) > 1e-6 {
			t.Errorf("%s = %.7f, want %.6f", c.name, c.got, c.want)
		}
	}
	// A constant image: no spread, so correlation is 1 by scikit-image's
	// convention, and never NaN.
	flat := GLCMProps(GLCM(make([]uint8, 16), 4, 4, 1, 0, 4), 4)
	if flat.Correlation != 1 || flat.Contrast != 0 || flat.ASM != 1 {
		t.Errorf("constant image: %+v", flat)
	}
}

// raster returns a w×h binary image (0/1) with pixel (x, y) set when
// inside(x, y) holds for its centre, as scikit-image treats a binary array.
func raster(w, h int, inside func(x, y float64) bool) Gray {
	g := NewGray(w, h)
	for y := 0; y < h; y++ {
		for x := 0; x < w; x++ {
			if inside(float64(x), float64(y)) {
				g.Pix[y*w+x] = 1
			}
		}
	}
	return g
}

// rect returns a test for a rectangle centred at (c, c) with half extents
// hx, hy, turned by theta radians.
func rect(c, hx, hy, theta float64) func(x, y float64) bool {
	cs, sn := math.Cos(theta), math.Sin(theta)
	return func(x, y float64) bool {
		u := cs*(x-c) + sn*(y-c)
		v := -sn*(x-c) + cs*(y-c)
		return math.Abs(u) <= hx && math.Abs(v) <= hy
	}
}

// triangle returns a test for the triangle with the given vertices, scaled
// by s and turned by theta about (c, c).
func triangle(c, s, theta float64, v [3][2]float64) func(x, y float64) bool {
	var p [3][2]float64
	for i, q := range v {
		p[i] = [2]float64{
			c + s*(math.Cos(theta)*q[0]-math.Sin(theta)*q[1]),
			c + s*(math.Sin(theta)*q[0]+math.Cos(theta)*q[1]),
		}
	}
	side := func(a, b [2]float64, x, y float64) float64 {
		return (b[0]-a[0])*(y-a[1]) - (b[1]-a[1])*(x-a[0])
	}
	return func(x, y float64) bool {
		d1, d2, d3 := side(p[0], p[1], x, y), side(p[1], p[2], x, y), side(p[2], p[0], x, y)
		return (d1 >= 0 && d2 >= 0 && d3 >= 0) || (d1 <= 0 && d2 <= 0 && d3 <= 0)
	}
}

func sum(x []float64) float64 {
	var s float64
	for _, v := range x {
		s += v
	}
	return s
}

func relErr(got, want float64) float64 { return math.Abs(got-want) / math.Abs(want) }

// TestHuScikitImageRasters checks φ of the disk, square and rectangle
// rasters against scikit-image 0.19.3 moments_hu on 201×201 binary images
// (copied into testdata/README.md; analytic φ1: disk 1/(2π), square 1/6 —
// Hu 1962, "Visual pattern recognition by moment invariants") to
// 1e-3 relative.
func TestHuScikitImageRasters(t *testing.T) {
	disk := HuMoments(raster(201, 201, func(x, y float64) bool { return (x-100)*(x-100)+(y-100)*(y-100) <= 80*80 }))
	square := HuMoments(raster(201, 201, rect(100, 60.5, 60.5, 0)))
	rectangle := HuMoments(raster(201, 201, rect(100, 80.5, 30.5, 0))) // 161 wide, 61 high
	for _, c := range []struct {
		name      string
		got, want float64
	}{
		{"disk φ1", disk[0], 0.159156},
		{"square φ1", square[0], 0.166655},
		{"rectangle φ1", rectangle[0], 0.251502},
		{"rectangle φ2", rectangle[1], 0.035484},
	} {
		if relErr(c.got, c.want) > 1e-3 {
			t.Errorf("%s = %.6f, want %.6f", c.name, c.got, c.want)
		}
	}
	for k := 1; k < 7; k++ {
		if math.Abs(disk[k]) > 1e-6 {
			t.Errorf("disk φ%d = %g, want ≈ 0", k+1, disk[k])
		}
	}
}

func rot90(g Gray) Gray {
	out := NewGray(g.H, g.W)
	for y := 0; y < g.H; y++ {
		for x := 0; x < g.W; x++ {
			// (x, y) → (H−1−y, x)
			out.Pix[x*out.W+(g.H-1-y)] = g.Pix[y*g.W+x]
		}
	}
	return out
}

// TestHuInvariance checks Hu's (1962) invariance to rotation and scale:
// exact (to rounding) for a 90° turn of the raster, within 2% for rasters
// re-drawn turned by 30° or scaled 2× (the 2% allows for pixelation; common
// practice, no source).
func TestHuInvariance(t *testing.T) {
	tri := [3][2]float64{{-60, -40}, {70, -20}, {-10, 75}}
	shapes := []struct {
		name    string
		base    Gray
		turned  Gray
		scaled  Gray
		compare int // how many leading invariants are large enough against pixelation to compare relatively
	}{
		{"rectangle",
			raster(201, 201, rect(100, 80.5, 30.5, 0)),
			raster(201, 201, rect(100, 80.5, 30.5, math.Pi/6)),
			raster(401, 401, rect(200, 161, 61, 0)), 2},
		{"triangle",
			raster(241, 241, triangle(120, 1, 0, tri)),
			raster(241, 241, triangle(120, 1, math.Pi/6, tri)),
			raster(481, 481, triangle(240, 2, 0, tri)), 3},
	}
	for _, s := range shapes {
		base := HuMoments(s.base)
		r90 := HuMoments(rot90(s.base))
		for k := range 7 {
			if math.Abs(r90[k]-base[k]) > 1e-9*math.Max(math.Abs(base[k]), 1e-12) {
				t.Errorf("%s φ%d: 90° turn %.12g, upright %.12g", s.name, k+1, r90[k], base[k])
			}
		}
		for _, v := range []struct {
			how string
			hu  [7]float64
		}{{"30° turn", HuMoments(s.turned)}, {"2× scale", HuMoments(s.scaled)}} {
			for k := 0; k < s.compare; k++ {
				if relErr(v.hu[k], base[k]) > 0.02 {
					t.Errorf("%s φ%d: %s %.6g, upright %.6g (%.2f%%)", s.name, k+1, v.how, v.hu[k], base[k], 100*relErr(v.hu[k], base[k]))
				}
			}
		}
	}
}

func TestRenderGray(t *testing.T) {
	img := RenderGray([]float64{0, 0.5, 1, 2}, 2, 2, 3)
	if b := img.Bounds(); b.Dx() != 6 || b.Dy() != 6 {
		t.Fatalf("bounds %v", b)
	}
	g := GrayOf(img)
	for _, c := range []struct {
		x, y int
		want float64
	}{{0, 0, 0}, {2, 2, 0}, {3, 0, 128.0 / 255}, {5, 2, 128.0 / 255}, {0, 3, 1}, {5, 5, 1}} {
		if got := g.At(c.x, c.y); math.Abs(got-c.want) > 1e-12 {
			t.Errorf("(%d,%d) = %v, want %v", c.x, c.y, got, c.want)
		}
	}
}
