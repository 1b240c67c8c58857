package compare

import (
	"bytes"
	"fmt"
	"html/template"
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
	series = []color.RGBA{
		color.RGBA{0x13, 0x5e, 0x66, 0xff}, // teal
		color.RGBA{0xa3, 0x33, 0x1a, 0xff}, // brick
		color.RGBA{0x8a, 0x5a, 0x00, 0xff}, // ochre
		color.RGBA{0x3b, 0x4a, 0x9c, 0xff}, // indigo
		color.RGBA{0x6b, 0x3a, 0x7a, 0xff}, // plum
		color.RGBA{0x2f, 0x6b, 0x2f, 0xff}, // green
	}
	glyphs     = []draw.GlyphDrawer{draw.CircleGlyph{}, draw.SquareGlyph{}}
	glyphNames = []string{"circle", "square"}
)

// KeyEntry is one entry of a plot's key, drawn beside the plot (never over
// the data): a name, a colour ("#rrggbb"), and a glyph ("circle",
// "square") or a line style ("dashed").
type KeyEntry struct {
	Name  string
	Color string
	Glyph string
	Line  string
}

// Swatch is the entry's sample, drawn with CSS alone (the report's classes
// swatch and mark).
func (k KeyEntry) Swatch() template.HTML {
	line := "border-top:2px solid transparent"
	if k.Line != "" {
		line = "border-top:2px " + k.Line + " " + k.Color
	}
	mark := ""
	if k.Glyph != "" {
		mark = fmt.Sprintf(`<span class="mark %s" style="background:%s"></span>`, k.Glyph, k.Color)
	}
	return template.HTML(fmt.Sprintf(`<span class="swatch" style="%s">%s</span>`, line, mark)) // our own constants and colours
}

func hex(c color.RGBA) string { return fmt.Sprintf("#%02x%02x%02x", c.R, c.G, c.B) }

// Scatter draws the points as an SVG element (no XML prologue, to inline
// in HTML): side A's value on the x axis, side B's on the y axis, both on
// the scale [lo, hi], one colour and glyph per series (in order of first
// appearance), and the 45° line y = x where the two sides agree. The key
// (the 45° line, then each series) is returned for the page to show beside
// the plot.
func Scatter(pts []Point, title, xLabel, yLabel string, lo, hi float64) (string, []KeyEntry, error) {
	if !(hi > lo) {
		return "", nil, fmt.Errorf("compare: scatter: scale [%v, %v] is empty", lo, hi)
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
		return "", nil, err
	}
	diag.Color, diag.Width = slate, vg.Points(1)
	diag.Dashes = []vg.Length{vg.Points(5), vg.Points(3)}
	p.Add(diag)
	key := []KeyEntry{{Name: "45° line: the two sides agree", Color: hex(slate), Line: "dashed"}}
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
			return "", nil, err
		}
		col, g := series[i%len(series)], (i/len(series)+i)%len(glyphs)
		s.Color, s.Shape, s.Radius = col, glyphs[g], vg.Points(2.6)
		p.Add(s)
		label := "parent"
		if len(names) > 1 {
			label = name
		}
		key = append(key, KeyEntry{Name: label, Color: hex(col), Glyph: glyphNames[g]})
	}
	pad := (hi - lo) * 0.02
	p.X.Min, p.X.Max, p.Y.Min, p.Y.Max = lo-pad, hi+pad, lo-pad, hi+pad
	c := vgsvg.New(13*vg.Centimeter, 13*vg.Centimeter)
	p.Draw(draw.New(c))
	var buf bytes.Buffer
	if _, err := c.WriteTo(&buf); err != nil {
		return "", nil, err
	}
	s := buf.String()
	if i := strings.Index(s, "<svg"); i >= 0 {
		s = s[i:]
	}
	return strings.Replace(s, "<svg ", `<svg role="img" style="max-width:100%;height:auto" `, 1), key, nil
}
