package rank

import (
	"fmt"
	"image/color"
	"io"
	"math"

	"gonum.org/v1/plot"
	"gonum.org/v1/plot/plotter"
	"gonum.org/v1/plot/vg"
	"gonum.org/v1/plot/vg/draw"
	"gonum.org/v1/plot/vg/vgsvg"
)

// Plot writes an SVG picture of the sweep: four panels over k (the best objective; the
// cophenetic correlation and the dispersion; the mean Hoyer sparseness of W's and of H's
// columns; the elbow score), with the recommended k marked by a dashed line in each.
func (r *SweepResult) Plot(w io.Writer) error {
	if len(r.Ks) == 0 {
		return fmt.Errorf("rank plot: the sweep has no k")
	}
	series := func(f func(KResult) float64) plotter.XYs {
		var xys plotter.XYs
		for _, kr := range r.Ks {
			if v := f(kr); !math.IsNaN(v) && !math.IsInf(v, 0) {
				xys = append(xys, plotter.XY{X: float64(kr.K), Y: v})
			}
		}
		return xys
	}
	type line struct {
		data  plotter.XYs
		color color.Color
	}
	blue := color.RGBA{R: 31, G: 119, B: 180, A: 255}
	orange := color.RGBA{R: 255, G: 127, B: 14, A: 255}
	// The series are named in the panel titles, by colour, rather than in legends that would
	// cover the lines.
	panels := []struct {
		title, ylabel string
		lines         []line
	}{
		{"Fit: best objective ||M .* (X - WH)||^2 over the starts", "objective", []line{{series(func(k KResult) float64 { return k.Objective }), blue}}},
		{"Stability: cophenetic correlation (blue), dispersion (orange)", "coefficient", []line{
			{series(func(k KResult) float64 { return k.Cophenetic }), blue},
			{series(func(k KResult) float64 { return k.Dispersion }), orange},
		}},
		{"Hoyer sparseness: columns of W (blue), of H (orange)", "mean sparseness", []line{
			{series(func(k KResult) float64 { return k.SparsenessW }), blue},
			{series(func(k KResult) float64 { return k.SparsenessH }), orange},
		}},
		{"Elbow score: gain of k / mean gain of larger k", "elbow score", []line{{series(func(k KResult) float64 { return k.Elbow }), blue}}},
	}
	plots := make([][]*plot.Plot, len(panels))
	for i, pn := range panels {
		p := plot.New()
		p.Title.Text = pn.title
		if i == 0 && r.Recommended > 0 {
			p.Title.Text = fmt.Sprintf("Recommended k = %d (dashed line)\n%s", r.Recommended, pn.title)
		}
		p.X.Label.Text = "k (groups)"
		p.Y.Label.Text = pn.ylabel
		p.X.Tick.Marker = integerTicks{}
		p.X.Min, p.X.Max = float64(r.Ks[0].K), float64(r.Ks[len(r.Ks)-1].K)
		lo, hi := math.Inf(1), math.Inf(-1)
		for _, ln := range pn.lines {
			if len(ln.data) == 0 {
				continue
			}
			l, s, err := plotter.NewLinePoints(ln.data)
			if err != nil {
				return fmt.Errorf("rank plot: %w", err)
			}
			l.Color, s.Color = ln.color, ln.color
			p.Add(l, s)
			for _, xy := range ln.data {
				lo, hi = math.Min(lo, xy.Y), math.Max(hi, xy.Y)
			}
		}
		if r.Recommended > 0 && lo <= hi {
			if lo == hi {
				lo, hi = lo-0.5, hi+0.5
			}
			mark, err := plotter.NewLine(plotter.XYs{{X: float64(r.Recommended), Y: lo}, {X: float64(r.Recommended), Y: hi}})
			if err != nil {
				return fmt.Errorf("rank plot: %w", err)
			}
			mark.Color = color.Gray{Y: 90}
			mark.Dashes = []vg.Length{vg.Points(4), vg.Points(3)}
			p.Add(mark)
		}
		plots[i] = []*plot.Plot{p}
	}
	c := vgsvg.New(7*vg.Inch, 11*vg.Inch)
	dc := draw.New(c)
	tiles := draw.Tiles{Rows: len(panels), Cols: 1, PadX: vg.Millimeter, PadY: 4 * vg.Millimeter,
		PadTop: 2 * vg.Millimeter, PadBottom: 2 * vg.Millimeter, PadLeft: 2 * vg.Millimeter, PadRight: 4 * vg.Millimeter}
	canvases := plot.Align(plots, tiles, dc)
	for i := range plots {
		plots[i][0].Draw(canvases[i][0])
	}
	if _, err := c.WriteTo(w); err != nil {
		return fmt.Errorf("rank plot: writing SVG: %w", err)
	}
	return nil
}

// integerTicks puts a tick at every whole k (labelled every other one past 20 values).
type integerTicks struct{}

func (integerTicks) Ticks(min, max float64) []plot.Tick {
	lo, hi := int(math.Ceil(min)), int(math.Floor(max))
	step := 1
	if hi-lo > 20 {
		step = 2
	}
	var ticks []plot.Tick
	for k := lo; k <= hi; k++ {
		t := plot.Tick{Value: float64(k)}
		if (k-lo)%step == 0 {
			t.Label = fmt.Sprint(k)
		}
		ticks = append(ticks, t)
	}
	return ticks
}
