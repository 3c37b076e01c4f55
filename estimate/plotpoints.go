package estimate

import (
	"fmt"
	"image/color"
	"math"

	"gonum.org/v1/plot"
	"gonum.org/v1/plot/plotter"
	"gonum.org/v1/plot/vg"
	"gonum.org/v1/plot/vg/draw"
)

// PlotPoints draws an Extrapolate result for user-supplied points (estimate points --plot):
// the mean holdout error per size with the range over repeats, the mean training error when
// given (hollow), the chosen curve solid over the measured sizes and dashed beyond with its
// pointwise bootstrap band shaded (Result.Band's level), the target as a grey line with n*
// and its interval marked, on log axes. Save it with SavePlot.
func PlotPoints(points, train []Point, res *Result, target, at float64, title string) (*plot.Plot, error) {
	if res == nil || len(res.Sizes) == 0 {
		return nil, fmt.Errorf("plot: no result")
	}
	p := plot.New()
	p.Title.Text = title
	p.X.Label.Text = "training size n (log scale)"
	p.Y.Label.Text = "error (log scale)"
	p.X.Scale, p.Y.Scale = plot.LogScale{}, plot.LogScale{}
	p.X.Tick.Marker, p.Y.Tick.Marker = plot.LogTicks{Prec: -1}, plot.LogTicks{Prec: -1}
	p.Legend.Top = true
	p.Legend.TextStyle.Font.Size = vg.Points(8)
	blue := plotColor(0x1f, 0x77, 0xb4)
	orange := plotColor(0xff, 0x7f, 0x0e)
	grey := plotColor(0x80, 0x80, 0x80)
	nMin, xEnd := res.Sizes[0], BandEnd(res, at)
	nMax := res.Sizes[len(res.Sizes)-1]
	// the pointwise bootstrap band, drawn first so it lies under everything else (lower edge
	// clamped at a tenth of the smallest measured mean error, for the log axis)
	measMin := math.Inf(1)
	for _, v := range res.MeanErr {
		if v > 0 {
			measMin = math.Min(measMin, v)
		}
	}
	band, err := bandPolygon(bandFor(res, nMin, xEnd), measMin/10, blue)
	if err != nil {
		return nil, err
	}
	if band != nil {
		p.Add(band)
	}

	groups, err := groupPoints(points, "point")
	if err != nil {
		return nil, err
	}
	var hold errPoints
	for _, g := range groups {
		lo, hi := minmax(g.errs)
		var s float64
		for _, v := range g.errs {
			s += v
		}
		m := s / float64(len(g.errs))
		if m <= 0 {
			continue
		}
		hold.XYs = append(hold.XYs, plotter.XY{X: g.n, Y: m})
		hold.lo = append(hold.lo, m-math.Max(lo, m*1e-3))
		hold.hi = append(hold.hi, hi-m)
	}
	if len(hold.XYs) > 0 {
		sc, err := plotter.NewScatter(hold.XYs)
		if err != nil {
			return nil, err
		}
		sc.GlyphStyle = draw.GlyphStyle{Color: blue, Radius: vg.Points(2.5), Shape: draw.CircleGlyph{}}
		eb, err := plotter.NewYErrorBars(hold)
		if err != nil {
			return nil, err
		}
		eb.LineStyle.Color = blue
		p.Add(sc, eb)
		p.Legend.Add("holdout error (range over repeats)", sc)
	}
	if len(train) > 0 {
		tg, err := groupPoints(train, "training point")
		if err != nil {
			return nil, err
		}
		var xy plotter.XYs
		for _, g := range tg {
			var s float64
			for _, v := range g.errs {
				s += v
			}
			if m := s / float64(len(g.errs)); m > 0 {
				xy = append(xy, plotter.XY{X: g.n, Y: m})
			}
		}
		if len(xy) > 0 {
			sc, err := plotter.NewScatter(xy)
			if err != nil {
				return nil, err
			}
			sc.GlyphStyle = draw.GlyphStyle{Color: orange, Radius: vg.Points(2.5), Shape: draw.RingGlyph{}}
			p.Add(sc)
			p.Legend.Add("training error", sc)
		}
	}
	curve := func(a, b float64) plotter.XYs {
		var xy plotter.XYs
		for i := 0; i <= 60; i++ {
			n := a * math.Pow(b/a, float64(i)/60)
			if y := Predict(res.Best, n); y > 0 && !math.IsNaN(y) {
				xy = append(xy, plotter.XY{X: n, Y: y})
			}
		}
		return xy
	}
	if xy := curve(nMin, nMax); len(xy) > 1 {
		l, err := plotter.NewLine(xy)
		if err != nil {
			return nil, err
		}
		l.Color = blue
		p.Add(l)
		p.Legend.Add(fmt.Sprintf("fitted %s", res.Best.Family), l)
	}
	if xy := curve(nMax, xEnd); len(xy) > 1 {
		l, err := plotter.NewLine(xy)
		if err != nil {
			return nil, err
		}
		l.Color = blue
		l.Dashes = []vg.Length{vg.Points(4), vg.Points(3)}
		p.Add(l)
		p.Legend.Add("extrapolation", l)
	}
	if band != nil {
		p.Legend.Add(fmt.Sprintf("%g%% band (bootstrap)", 100*res.Level), band)
	}
	if target > 0 {
		l, err := plotter.NewLine(plotter.XYs{{X: nMin, Y: target}, {X: xEnd, Y: target}})
		if err != nil {
			return nil, err
		}
		l.Color = grey
		p.Add(l)
		p.Legend.Add(fmt.Sprintf("target %g", target), l)
		if ns := res.NStar; ns != nil && res.Reachable && !math.IsInf(ns.Est, 0) {
			hi := ns.Hi
			if math.IsInf(hi, 0) {
				hi = xEnd
			}
			span, err := plotter.NewLine(plotter.XYs{{X: ns.Lo, Y: target}, {X: hi, Y: target}})
			if err != nil {
				return nil, err
			}
			span.Color = blue
			span.Width = vg.Points(3)
			mk, err := plotter.NewScatter(plotter.XYs{{X: ns.Est, Y: target}})
			if err != nil {
				return nil, err
			}
			mk.GlyphStyle = draw.GlyphStyle{Color: blue, Radius: vg.Points(4), Shape: draw.CrossGlyph{}}
			p.Add(span, mk)
			p.Legend.Add(fmt.Sprintf("n* ≈ %.0f (%g%% interval)", math.Ceil(ns.Est), 100*res.Level), mk)
		}
	}
	return p, nil
}

func plotColor(r, g, b uint8) color.RGBA { return color.RGBA{R: r, G: g, B: b, A: 255} }
