package verdict

import (
	"html"
	"math"
	"regexp"
	"strconv"
	"strings"
	"testing"

	"gonum.org/v1/plot"
	"gonum.org/v1/plot/font"
	"gonum.org/v1/plot/text"
	"gonum.org/v1/plot/vg"
)

// This file reads back the SVG that gonum/plot's vgsvg writes, so that the
// report's tests can check its geometry: where each text and each drawn
// path lies on the figure, in SVG user units with y growing downwards.
//
// vgsvg wraps everything in <g transform="scale(1, -1) translate(0, -H)">
// (a y-up frame) and writes each text with its own transform="scale(1, -1)";
// rotated texts sit in <g transform="rotate(θ)">.

// box is an axis-aligned rectangle in screen coordinates.
type box struct{ x0, y0, x1, y1 float64 }

func (b box) intersects(c box) bool {
	return b.x0 < c.x1 && c.x0 < b.x1 && b.y0 < c.y1 && c.y0 < b.y1
}

func (b box) contains(x, y float64) bool { return x >= b.x0 && x <= b.x1 && y >= b.y0 && y <= b.y1 }

// svgText is one <text> element: its content, font size and the box its
// glyphs cover, measured with the font gonum/plot drew it with (Liberation
// Sans, from gonum's own font cache).
type svgText struct {
	s    string
	size float64
	x, y float64 // anchor (left end of the baseline) on the screen
	rot  bool    // rotated by ±90°
	box  box
}

// svgPath is one <path>: its style and the polyline through its points (an
// arc adds its circle's bounding points).
type svgPath struct {
	style string
	pts   [][2]float64
	blobs []box // circles drawn with arcs
}

func (p svgPath) has(prop string) string {
	for _, kv := range strings.Split(p.style, ";") {
		k, v, _ := strings.Cut(kv, ":")
		if strings.TrimSpace(k) == prop {
			return strings.ToUpper(strings.TrimSpace(v))
		}
	}
	return ""
}

type svgDoc struct {
	w, h  float64
	texts []svgText
	paths []svgPath
}

var (
	svgHead   = regexp.MustCompile(`viewBox="0 0 ([0-9.]+) ([0-9.]+)"`)
	svgToken  = regexp.MustCompile(`(?s)<text x="([-0-9.e]+)" y="([-0-9.e]+)"[^>]*style="([^"]*)"[^>]*>(.*?)</text>|<path d="([^"]*)"[^>]*style="([^"]*)"|<g transform="rotate\(([-0-9.e]+)\)">|</g>`)
	svgNumber = regexp.MustCompile(`[-0-9.e]+`)
	fontSize  = regexp.MustCompile(`font-size:([0-9.]+)px`)
)

func parseSVG(t *testing.T, s string) svgDoc {
	t.Helper()
	m := svgHead.FindStringSubmatch(s)
	if m == nil {
		t.Fatalf("no viewBox in %.200s", s)
	}
	var d svgDoc
	d.w, _ = strconv.ParseFloat(m[1], 64)
	d.h, _ = strconv.ParseFloat(m[2], 64)
	var rot []float64
	for _, tk := range svgToken.FindAllStringSubmatch(s, -1) {
		switch {
		case strings.HasPrefix(tk[0], "<text"):
			x, _ := strconv.ParseFloat(tk[1], 64)
			y, _ := strconv.ParseFloat(tk[2], 64)
			size := 10.0
			if f := fontSize.FindStringSubmatch(tk[3]); f != nil {
				size, _ = strconv.ParseFloat(f[1], 64)
			}
			txt := svgText{s: html.UnescapeString(tk[4]), size: size}
			sty := text.Style{Font: font.Font{Typeface: "Liberation", Variant: "Sans", Size: vg.Length(size)}, Handler: plot.DefaultTextHandler}
			w := float64(sty.Width(txt.s))
			ext := sty.FontExtents()
			asc, desc := float64(ext.Ascent), float64(ext.Descent)
			// The text's own scale(1, −1) puts it at (x, −y) in the
			// group's frame.
			gx, gy := x, -y
			angle := 0.0
			for _, r := range rot {
				angle += r
			}
			if math.Abs(math.Mod(angle, 180)) > 1 {
				// rotate(θ) then the outer flip: (x, y) → (x cosθ − y sinθ, x sinθ + y cosθ).
				th := angle * math.Pi / 180
				gx, gy = gx*math.Cos(th)-gy*math.Sin(th), gx*math.Sin(th)+gy*math.Cos(th)
				txt.rot = true
				txt.x, txt.y = gx, d.h-gy
				txt.box = box{txt.x - asc, txt.y - w, txt.x + desc, txt.y}
			} else {
				txt.x, txt.y = gx, d.h-gy
				txt.box = box{txt.x, txt.y - asc, txt.x + w, txt.y + desc}
			}
			d.texts = append(d.texts, txt)
		case strings.HasPrefix(tk[0], "<path"):
			d.paths = append(d.paths, parsePath(tk[5], tk[6], d.h))
		case strings.HasPrefix(tk[0], "<g"):
			r, _ := strconv.ParseFloat(tk[7], 64)
			rot = append(rot, r)
		default:
			if len(rot) > 0 {
				rot = rot[:len(rot)-1]
			}
		}
	}
	return d
}

// parsePath reads M, L, A and Z commands (all vgsvg writes).
func parsePath(dattr, style string, h float64) svgPath {
	p := svgPath{style: style}
	i := 0
	var cmd byte
	nums := func(s string) []float64 {
		var out []float64
		for _, n := range svgNumber.FindAllString(s, -1) {
			v, _ := strconv.ParseFloat(n, 64)
			out = append(out, v)
		}
		return out
	}
	parts := regexp.MustCompile(`[MLAZ][^MLAZ]*`).FindAllString(dattr, -1)
	for _, part := range parts {
		cmd = part[0]
		v := nums(part[1:])
		switch cmd {
		case 'M', 'L':
			for j := 0; j+1 < len(v); j += 2 {
				p.pts = append(p.pts, [2]float64{v[j], h - v[j+1]})
			}
		case 'A':
			if len(v) >= 7 {
				r := v[0]
				x, y := v[5], h-v[6]
				if n := len(p.pts); n > 0 {
					px, py := p.pts[n-1][0], p.pts[n-1][1]
					cx, cy := (px+x)/2, (py+y)/2
					p.blobs = append(p.blobs, box{cx - r, cy - r, cx + r, cy + r})
				}
				p.pts = append(p.pts, [2]float64{x, y})
			}
		}
		i++
	}
	return p
}

// crosses reports whether the path draws anything inside b: a point of a
// segment (sampled every 0.25 units) or a circle.
func (p svgPath) crosses(b box) bool {
	for _, c := range p.blobs {
		if c.intersects(b) {
			return true
		}
	}
	if len(p.pts) == 1 {
		return b.contains(p.pts[0][0], p.pts[0][1])
	}
	for i := 1; i < len(p.pts); i++ {
		a, c := p.pts[i-1], p.pts[i]
		n := int(math.Hypot(c[0]-a[0], c[1]-a[1])/0.25) + 1
		for k := 0; k <= n; k++ {
			f := float64(k) / float64(n)
			if b.contains(a[0]+f*(c[0]-a[0]), a[1]+f*(c[1]-a[1])) {
				return true
			}
		}
	}
	return false
}

// bounds is the bounding box of the path's points and circles.
func (p svgPath) bounds() box {
	b := box{math.Inf(1), math.Inf(1), math.Inf(-1), math.Inf(-1)}
	add := func(x, y float64) {
		b.x0, b.y0, b.x1, b.y1 = math.Min(b.x0, x), math.Min(b.y0, y), math.Max(b.x1, x), math.Max(b.y1, y)
	}
	for _, q := range p.pts {
		add(q[0], q[1])
	}
	for _, c := range p.blobs {
		add(c.x0, c.y0)
		add(c.x1, c.y1)
	}
	return b
}

// svgs returns the inline <svg> elements of an HTML page, each with the
// text of the nearest element id before it ("" if none).
func svgs(page string) []string {
	var out []string
	for {
		i := strings.Index(page, "<svg")
		if i < 0 {
			return out
		}
		j := strings.Index(page[i:], "</svg>")
		if j < 0 {
			return out
		}
		out = append(out, page[i:i+j+len("</svg>")])
		page = page[i+j:]
	}
}

// plotWith returns the one SVG plot of the page that draws the given text
// (an axis label), failing the test if there is not exactly one.
func plotWith(t *testing.T, page, label string) svgDoc {
	t.Helper()
	var found []string
	for _, s := range svgs(page) {
		if strings.Contains(html.UnescapeString(s), ">"+label+"<") {
			found = append(found, s)
		}
	}
	if len(found) != 1 {
		t.Fatalf("%d plots with the text %q, want 1", len(found), label)
	}
	return parseSVG(t, found[0])
}
