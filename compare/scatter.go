package compare

import (
	"bytes"
	"fmt"
	"image/color"
	"strings"

	"gonum.org/v1/plot"
	"gonum.org/v1/plot/plotter"
	"gonum.org/v1/plot/text"
	"gonum.org/v1/plot/vg"
	"gonum.org/v1/plot/vg/draw"
	"gonum.org/v1/plot/vg/vgsvg"
)

// The plot colours: dark ink, a grey for the 45° line, and one colour per
// series (contrast above 4.5:1 on white), then repeated with other glyphs.
var (
	ink    = color.RGBA{0x1f, 0x23, 0x28, 0xff}
	slate  = color.RGBA{0x5a, 0x63, 0x6e, 0xff}
	series = []color.Color{
		color.RGBA{0x13, 0x5e, 0x66, 0xff}, // teal
		color.RGBA{0xa3, 0x33, 0x1a, 0xff}, // brick
		color.RGBA{0x8a, 0x5a, 0x00, 0xff}, // ochre
		color.RGBA{0x3b, 0x4a, 0x9c, 0xff}, // indigo
		color.RGBA{0x6b, 0x3a, 0x7a, 0xff}, // plum
		color.RGBA{0x2f, 0x6b, 0x2f, 0xff}, // green
	}
	glyphs = []draw.GlyphDrawer{draw.CircleGlyph{}, draw.SquareGlyph{}, draw.TriangleGlyph{}, draw.PlusGlyph{}, draw.CrossGlyph{}, draw.RingGlyph{}}
)

// Scatter draws the points as an SVG element (no XML prologue, to inline
// in HTML): side A's value on the x axis, side B's on the y axis, both on
// the scale [lo, hi], one colour and glyph per series (in order of first
// appearance, named in the legend when there are several), and the 45°
// line y = x where the two sides agree.
func Scatter(pts []Point, title, xLabel, yLabel string, lo, hi float64) (string, error) {
	if !(hi > lo) {
		return "", fmt.Errorf("compare: scatter: scale [%v, %v] is empty", lo, hi)
	}
	p := plot.New()
	p.Title.Text = title
	p.X.Label.Text = xLabel
	p.Y.Label.Text = yLabel
	for _, st := range []*text.Style{&p.Title.TextStyle, &p.X.Label.TextStyle, &p.Y.Label.TextStyle, &p.X.Tick.Label, &p.Y.Tick.Label, &p.Legend.TextStyle} {
		st.Font.Variant = "Sans"
		st.Color = ink
	}
	p.Title.TextStyle.Font.Size = vg.Points(12)
	for _, a := range []*plot.Axis{&p.X, &p.Y} {
		a.Color, a.Tick.Color = ink, ink
	}
	g := plotter.NewGrid()
	g.Vertical.Color, g.Horizontal.Color = color.Gray{0xe4}, color.Gray{0xe4}
	p.Add(g)
	diag, err := plotter.NewLine(plotter.XYs{{X: lo, Y: lo}, {X: hi, Y: hi}})
	if err != nil {
		return "", err
	}
	diag.Color, diag.Width = slate, vg.Points(1)
	diag.Dashes = []vg.Length{vg.Points(5), vg.Points(3)}
	p.Add(diag)
	p.Legend.Add("45° line (the sides agree)", diag)
	var names []string
	bySeries := map[string]plotter.XYs{}
	for _, q := range pts {
		if _, ok := bySeries[q.Series]; !ok {
			names = append(names, q.Series)
		}
		bySeries[q.Series] = append(bySeries[q.Series], plotter.XY{X: q.X, Y: q.Y})
	}
	for i, name := range names {
		s, err := plotter.NewScatter(bySeries[name])
		if err != nil {
			return "", err
		}
		s.Color = series[i%len(series)]
		s.Shape = glyphs[(i/len(series)+i)%len(glyphs)]
		s.Radius = vg.Points(2.6)
		p.Add(s)
		if len(names) > 1 {
			p.Legend.Add(name, s)
		}
	}
	p.Legend.Top, p.Legend.Left = true, true
	pad := (hi - lo) * 0.02
	p.X.Min, p.X.Max, p.Y.Min, p.Y.Max = lo-pad, hi+pad, lo-pad, hi+pad
	c := vgsvg.New(13*vg.Centimeter, 13*vg.Centimeter)
	p.Draw(draw.New(c))
	var buf bytes.Buffer
	if _, err := c.WriteTo(&buf); err != nil {
		return "", err
	}
	s := buf.String()
	if i := strings.Index(s, "<svg"); i >= 0 {
		s = s[i:]
	}
	return strings.Replace(s, "<svg ", `<svg role="img" style="max-width:100%;height:auto" `, 1), nil
}
