package report

import (
	"fmt"
	"image/color"

	"gonum.org/v1/plot"
	"gonum.org/v1/plot/plotter"
	"gonum.org/v1/plot/vg"

	"github.com/hewline/hewline/guidance/tracklog"
)

var (
	pngBlue  = color.RGBA{0x1f, 0x5f, 0xa8, 0xff}
	pngAlarm = color.RGBA{0xf4, 0xb4, 0xb4, 0xff}
	pngGreen = color.RGBA{0x3a, 0x8a, 0x4f, 0xff}
)

// seriesPNG saves a gonum/plot chart of one value over time with the alarm
// periods shaded to path.
func seriesPNG(path, title, unit string, l *tracklog.Log, alarms []Period, lo, hi float64, get func(*tracklog.Record) (float64, bool)) error {
	p := plot.New()
	p.Title.Text = title
	p.X.Label.Text = "time (s)"
	p.Y.Label.Text = unit
	p.Y.Min, p.Y.Max = lo, hi
	for _, a := range alarms {
		poly, err := plotter.NewPolygon(plotter.XYs{{X: a.Start, Y: lo}, {X: a.Start + a.Duration, Y: lo},
			{X: a.Start + a.Duration, Y: hi}, {X: a.Start, Y: hi}})
		if err != nil {
			return fmt.Errorf("report: %s: %w", path, err)
		}
		poly.Color = pngAlarm
		poly.LineStyle.Width = 0
		p.Add(poly)
	}
	// One line per unbroken stretch of values.
	var seg plotter.XYs
	flush := func() error {
		if len(seg) == 0 {
			return nil
		}
		ln, err := plotter.NewLine(seg)
		if err != nil {
			return err
		}
		ln.Color = pngBlue
		p.Add(ln)
		seg = nil
		return nil
	}
	for i := range l.Records {
		v, ok := get(&l.Records[i])
		if !ok {
			if err := flush(); err != nil {
				return fmt.Errorf("report: %s: %w", path, err)
			}
			continue
		}
		seg = append(seg, plotter.XY{X: l.Records[i].T, Y: min(hi, max(lo, v))})
	}
	if err := flush(); err != nil {
		return fmt.Errorf("report: %s: %w", path, err)
	}
	p.Y.Min, p.Y.Max = lo, hi
	if err := p.Save(18*vg.Centimeter, 6*vg.Centimeter, path); err != nil {
		return fmt.Errorf("report: %w", err)
	}
	return nil
}

// histPNG saves the confidence histogram (bins over [0, 1]) to path.
func histPNG(path string, bins []int) error {
	p := plot.New()
	p.Title.Text = "confidence (all frames)"
	p.X.Label.Text = "confidence"
	p.Y.Label.Text = "frames"
	h := make(plotter.XYs, len(bins))
	for i, c := range bins {
		h[i] = plotter.XY{X: (float64(i) + 0.5) / float64(len(bins)), Y: float64(c)}
	}
	hist, err := plotter.NewHistogram(h, len(bins))
	if err != nil {
		return fmt.Errorf("report: %s: %w", path, err)
	}
	// Exact bin edges (NewHistogram spreads bins over the data range).
	n := float64(len(bins))
	for i := range hist.Bins {
		hist.Bins[i] = plotter.HistogramBin{Min: float64(i) / n, Max: float64(i+1) / n, Weight: float64(bins[i])}
	}
	hist.Width = 1 / n
	hist.FillColor = pngGreen
	p.Add(hist)
	p.X.Min, p.X.Max = 0, 1
	if err := p.Save(18*vg.Centimeter, 6*vg.Centimeter, path); err != nil {
		return fmt.Errorf("report: %w", err)
	}
	return nil
}

// statesPNG saves a bar chart of seconds per state to path.
func statesPNG(path string, sec map[string]float64) error {
	names := stateOrder(sec)
	p := plot.New()
	p.Title.Text = "time in each state"
	p.Y.Label.Text = "seconds"
	vals := make(plotter.Values, len(names))
	for i, n := range names {
		vals[i] = sec[n]
	}
	if len(vals) == 0 {
		vals = plotter.Values{0}
		names = []string{"(none)"}
	}
	bars, err := plotter.NewBarChart(vals, vg.Points(30))
	if err != nil {
		return fmt.Errorf("report: %s: %w", path, err)
	}
	bars.Color = pngGreen
	p.Add(bars)
	p.NominalX(names...)
	if err := p.Save(12*vg.Centimeter, 6*vg.Centimeter, path); err != nil {
		return fmt.Errorf("report: %w", err)
	}
	return nil
}
