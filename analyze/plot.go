package analyze

import (
	"fmt"
	"image/color"
	"io"
	"math"

	"gonum.org/v1/plot"
	"gonum.org/v1/plot/plotter"
	"gonum.org/v1/plot/vg"
)

// palette is a set of distinguishable line colours of our own choosing.
var palette = []color.RGBA{
	{0x1f, 0x4e, 0x79, 0xff}, {0xc0, 0x50, 0x1e, 0xff}, {0x2e, 0x7d, 0x32, 0xff}, {0x7b, 0x3f, 0x99, 0xff},
	{0x9e, 0x7a, 0x00, 0xff}, {0x00, 0x83, 0x8f, 0xff}, {0xad, 0x14, 0x57, 0xff}, {0x55, 0x55, 0x55, 0xff},
}

func lineColour(i int) color.RGBA { return palette[i%len(palette)] }

// PlotCurves draws voltage against charge for the given curves and writes
// the image in format "png" or "svg" to w. Width and height are in points.
func PlotCurves(w io.Writer, curves []Curve, title, format string, width, height float64) error {
	p := plot.New()
	p.Title.Text = title
	p.X.Label.Text = "charge moved (Ah)"
	p.Y.Label.Text = "voltage (V)"
	p.Add(plotter.NewGrid())
	for i, c := range curves {
		if len(c.Q) < 2 {
			continue
		}
		xy := make(plotter.XYs, len(c.Q))
		for k := range c.Q {
			xy[k].X, xy[k].Y = c.Q[k], c.V[k]
		}
		l, err := plotter.NewLine(xy)
		if err != nil {
			return fmt.Errorf("plot %s: %w", c.Label, err)
		}
		l.Color = lineColour(i)
		l.Width = vg.Points(1)
		p.Add(l)
		p.Legend.Add(curveTitle(c), l)
	}
	// the legend goes where the curves are not: top right for a
	// discharge (falling from the left), bottom right for a charge
	p.Legend.Top = len(curves) > 0 && curves[0].Kind == Discharge
	p.Legend.Left = false
	return save(p, w, format, width, height)
}

// curveTitle labels a curve with what it is, its current and temperature.
func curveTitle(c Curve) string {
	s := c.Label
	if c.Source != "" {
		s = c.Source + " " + s
	}
	s += " " + string(c.Kind)
	if c.CRate.Valid() {
		s += fmt.Sprintf(" %.2g C", float64(c.CRate))
	}
	if c.MeanTemp.Valid() {
		s += fmt.Sprintf(" %.0f °C", float64(c.MeanTemp))
	}
	if c.SteadyOnly {
		s += " (steady parts)"
	}
	return s
}

// PlotXY draws one or more named series (x, y) with axis labels.
func PlotXY(w io.Writer, title, xl, yl string, names []string, xs, ys [][]float64, format string, width, height float64) error {
	p := plot.New()
	p.Title.Text = title
	p.X.Label.Text = xl
	p.Y.Label.Text = yl
	p.Add(plotter.NewGrid())
	for i := range xs {
		var xy plotter.XYs
		for k := range xs[i] {
			if !math.IsNaN(ys[i][k]) && !math.IsInf(ys[i][k], 0) {
				xy = append(xy, plotter.XY{X: xs[i][k], Y: ys[i][k]})
			}
		}
		if len(xy) < 2 {
			continue
		}
		l, err := plotter.NewLine(xy)
		if err != nil {
			return fmt.Errorf("plot %s: %w", title, err)
		}
		l.Color = lineColour(i)
		l.Width = vg.Points(1)
		p.Add(l)
		if len(xs) > 1 && i < len(names) {
			p.Legend.Add(names[i], l)
		}
	}
	return save(p, w, format, width, height)
}

func save(p *plot.Plot, w io.Writer, format string, width, height float64) error {
	if width <= 0 {
		width = 640
	}
	if height <= 0 {
		height = 400
	}
	switch format {
	case "png", "svg":
	default:
		return fmt.Errorf("plot: format %q: want png or svg", format)
	}
	wt, err := p.WriterTo(vg.Points(width), vg.Points(height), format)
	if err != nil {
		return fmt.Errorf("plot: %w", err)
	}
	if _, err := wt.WriteTo(w); err != nil {
		return fmt.Errorf("plot: %w", err)
	}
	return nil
}
