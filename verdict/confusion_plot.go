package verdict

import (
	"html/template"
	"image/color"
	"strconv"

	"gonum.org/v1/plot/plotter"
	"gonum.org/v1/plot/text"
	"gonum.org/v1/plot/vg"
	"gonum.org/v1/plot/vg/draw"
)

// plotConfusion draws the confusion matrix as a heat map: one square per
// (consensus class, machine class) cell, shaded by the cell's share of its
// row (white 0, teal 1), with the count written in it; the first class is
// the top row.
func (r *Report) plotConfusion() (template.HTML, error) {
	cm := r.Agreement.Confusion
	k := len(cm)
	p := newPlot("Confusion matrix (shade: share of the consensus row)", "machine class", "consensus class")
	p.Legend.Top = true
	var lab plotter.XYLabels
	var styles []text.Style
	for t, row := range cm {
		tot := 0
		for _, v := range row {
			tot += v
		}
		y := float64(k - 1 - t)
		for q, v := range row {
			f := 0.0
			if tot > 0 {
				f = float64(v) / float64(tot)
			}
			x := float64(q)
			sq, err := plotter.NewPolygon(plotter.XYs{{X: x - 0.5, Y: y - 0.5}, {X: x + 0.5, Y: y - 0.5}, {X: x + 0.5, Y: y + 0.5}, {X: x - 0.5, Y: y + 0.5}})
			if err != nil {
				return "", err
			}
			sq.Color = color.RGBA{uint8(255 - f*(255-0x13)), uint8(255 - f*(255-0x5e)), uint8(255 - f*(255-0x66)), 0xff}
			sq.LineStyle.Color = color.White
			sq.LineStyle.Width = vg.Points(1)
			p.Add(sq)
			lab.XYs = append(lab.XYs, plotter.XY{X: x, Y: y})
			lab.Labels = append(lab.Labels, strconv.Itoa(v))
			st := text.Style{Color: ink, XAlign: draw.XCenter, YAlign: draw.YCenter, Handler: p.Title.TextStyle.Handler, Font: p.X.Tick.Label.Font}
			if f > 0.45 {
				st.Color = color.White // contrast on dark cells
			}
			styles = append(styles, st)
		}
	}
	l, err := plotter.NewLabels(lab)
	if err != nil {
		return "", err
	}
	l.TextStyle = styles
	p.Add(l)
	xs := make([]string, k)
	ys := make([]string, k)
	for c, name := range r.Classes {
		if c < k {
			xs[c] = name
			ys[k-1-c] = name
		}
	}
	p.NominalX(xs...)
	p.NominalY(ys...)
	side := vg.Length(4+1.6*float64(k)) * vg.Centimeter
	return svgOf(p, side+3*vg.Centimeter, side)
}
