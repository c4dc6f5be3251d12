package calibrate

import (
	"fmt"
	"image/color"
	"io"

	"gonum.org/v1/plot"
	"gonum.org/v1/plot/plotter"
	"gonum.org/v1/plot/vg"
	"gonum.org/v1/plot/vg/draw"
	"gonum.org/v1/plot/vg/vgsvg"
)

// PlotReliability writes an SVG reliability diagram of the bins: the share of placements that
// were correct against their mean confidence in each non-empty bin, beside the diagonal of
// perfect calibration, over a panel with the share of placements in each bin. The title gives
// the expected calibration error.
func PlotReliability(w io.Writer, bins []Bin, ece float64, samples int) error {
	if len(bins) == 0 {
		return fmt.Errorf("reliability plot: no bins")
	}
	blue := color.RGBA{R: 31, G: 119, B: 180, A: 255}
	top := plot.New()
	top.Title.Text = fmt.Sprintf("Reliability of the confidence: ECE %.3f, %d fragments", ece, samples)
	top.X.Label.Text = "confidence (mean in bin)"
	top.Y.Label.Text = "share correct"
	top.X.Min, top.X.Max, top.Y.Min, top.Y.Max = 0, 1, 0, 1
	diag, err := plotter.NewLine(plotter.XYs{{X: 0, Y: 0}, {X: 1, Y: 1}})
	if err != nil {
		return fmt.Errorf("reliability plot: %w", err)
	}
	diag.Color = color.Gray{Y: 120}
	diag.Dashes = []vg.Length{vg.Points(4), vg.Points(3)}
	top.Add(diag)
	top.Legend.Add("perfect calibration", diag)
	var pts plotter.XYs
	for _, b := range bins {
		if b.Count > 0 {
			pts = append(pts, plotter.XY{X: b.Confidence, Y: b.Accuracy})
		}
	}
	if len(pts) > 0 {
		l, s, err := plotter.NewLinePoints(pts)
		if err != nil {
			return fmt.Errorf("reliability plot: %w", err)
		}
		l.Color, s.Color = blue, blue
		top.Add(l, s)
		top.Legend.Add("placements", l, s)
	}
	top.Legend.Top = true
	top.Legend.Left = true
	top.Legend.XOffs = vg.Points(6)
	top.Add(plotter.NewGrid())

	bottom := plot.New()
	bottom.X.Label.Text = "confidence bin"
	bottom.Y.Label.Text = "share of fragments"
	bottom.X.Min, bottom.X.Max = 0, 1
	total := 0
	for _, b := range bins {
		total += b.Count
	}
	for _, b := range bins {
		if b.Count == 0 || total == 0 {
			continue
		}
		share := float64(b.Count) / float64(total)
		poly, err := plotter.NewPolygon(plotter.XYs{{X: b.Lo, Y: 0}, {X: b.Hi, Y: 0}, {X: b.Hi, Y: share}, {X: b.Lo, Y: share}})
		if err != nil {
			return fmt.Errorf("reliability plot: %w", err)
		}
		poly.Color = blue
		poly.LineStyle.Color = color.White
		bottom.Add(poly)
	}
	bottom.Y.Min = 0

	plots := [][]*plot.Plot{{top}, {bottom}}
	c := vgsvg.New(6*vg.Inch, 7.5*vg.Inch)
	dc := draw.New(c)
	tiles := draw.Tiles{Rows: 2, Cols: 1, PadX: vg.Millimeter, PadY: 4 * vg.Millimeter,
		PadTop: 2 * vg.Millimeter, PadBottom: 2 * vg.Millimeter, PadLeft: 2 * vg.Millimeter, PadRight: 4 * vg.Millimeter}
	canvases := plot.Align(plots, tiles, dc)
	top.Draw(canvases[0][0])
	bottom.Draw(canvases[1][0])
	if _, err := c.WriteTo(w); err != nil {
		return fmt.Errorf("reliability plot: writing SVG: %w", err)
	}
	return nil
}

// Plot writes the report's reliability diagram (see PlotReliability).
func (r *Report) Plot(w io.Writer) error { return PlotReliability(w, r.Bins, r.ECE, r.Samples) }
