package estimate

// Learning-curve plots (gonum.org/v1/plot): holdout error (filled markers, with the range over
// repeats as error bars) and training error (hollow markers) versus training size on log
// axes, one colour per capacity; each capacity's fitted curve solid over the measured sizes and
// dashed where it extrapolates; its pointwise bootstrap confidence band shaded in the same
// colour (the asymptote's interval as a strip when there is no band); the
// target as a grey horizontal line with each reachable n* marked and its interval drawn on it.

import (
	"fmt"
	"image/color"
	"math"
	"path/filepath"
	"sort"
	"strconv"
	"strings"

	"gonum.org/v1/plot"
	"gonum.org/v1/plot/plotter"
	"gonum.org/v1/plot/vg"
	"gonum.org/v1/plot/vg/draw"
)

// palette: ColorBrewer "Dark2" (8 qualitative colours, Brewer & Harrower, colorbrewer2.org),
// then four darker extras, so up to 12 capacities get distinct colours.
var palette = []color.Color{
	color.RGBA{0x1b, 0x9e, 0x77, 0xff}, color.RGBA{0xd9, 0x5f, 0x02, 0xff}, color.RGBA{0x75, 0x70, 0xb3, 0xff},
	color.RGBA{0xe7, 0x29, 0x8a, 0xff}, color.RGBA{0x66, 0xa6, 0x1e, 0xff}, color.RGBA{0xe6, 0xab, 0x02, 0xff},
	color.RGBA{0xa6, 0x76, 0x1d, 0xff}, color.RGBA{0x66, 0x66, 0x66, 0xff}, color.RGBA{0x1f, 0x4e, 0x9a, 0xff},
	color.RGBA{0x8c, 0x1c, 0x13, 0xff}, color.RGBA{0x2d, 0x6a, 0x4f, 0xff}, color.RGBA{0x5b, 0x2a, 0x86, 0xff},
}

// PlotOptions label a curve plot.
type PlotOptions struct {
	Title  string
	YLabel string // the metric
}

type errPoints struct {
	plotter.XYs
	lo, hi []float64
}

func (e errPoints) YError(i int) (float64, float64) { return e.lo[i], e.hi[i] }

// PlotCurves draws the measured points and the report's fitted curves.
func PlotCurves(points []CurvePoint, rep *SweepReport, po PlotOptions) (*plot.Plot, error) {
	p := plot.New()
	p.Title.Text = po.Title
	p.X.Label.Text = "training size n (log scale)"
	p.Y.Label.Text = po.YLabel + " (log scale)"
	p.X.Scale, p.Y.Scale = plot.LogScale{}, plot.LogScale{}
	p.X.Tick.Marker, p.Y.Tick.Marker = logTicks{}, logTicks{}
	p.Legend.Top = true
	p.Legend.TextStyle.Font.Size = vg.Points(8)

	byCap := map[float64][]CurvePoint{}
	var caps []float64
	for _, q := range points {
		if _, ok := byCap[q.Capacity]; !ok {
			caps = append(caps, q.Capacity)
		}
		byCap[q.Capacity] = append(byCap[q.Capacity], q)
	}
	sort.Float64s(caps)
	if len(caps) == 0 {
		return nil, fmt.Errorf("plot: no points")
	}
	nMin, nMax := math.Inf(1), 0.0
	yMin, yMax := math.Inf(1), 0.0
	for _, q := range points {
		nMin, nMax = math.Min(nMin, float64(q.Size)), math.Max(nMax, float64(q.Size))
		for _, v := range []float64{q.HoldoutErr, q.TrainErr} {
			if v > 0 {
				yMin, yMax = math.Min(yMin, v), math.Max(yMax, v)
			}
		}
	}
	// Extrapolate to 4× the largest size, or to the furthest finite n* / --at within 1000×.
	xEnd := 4 * nMax
	if rep != nil {
		if rep.At > xEnd {
			xEnd = rep.At
		}
		for _, c := range rep.Capacities {
			if c.Result != nil && c.Result.NStar != nil && c.Result.Reachable && !math.IsInf(c.Result.NStar.Est, 0) {
				xEnd = math.Max(xEnd, 1.2*c.Result.NStar.Est)
			}
		}
		xEnd = math.Min(xEnd, 100*nMax)
	}
	measMin := yMin // the smallest measured error bounds the axis (extrapolations may dive)
	results := map[float64]CapacityResult{}
	if rep != nil {
		for _, c := range rep.Capacities {
			results[c.Capacity] = c
		}
	}
	model := ""
	if rep != nil {
		model = rep.Model
	}
	bandShown, stripShown := false, false
	// bands go under every capacity's points and curves
	var under, over []plot.Plotter
	add := func(ps ...plot.Plotter) { over = append(over, ps...) }
	for i, c := range caps {
		col := palette[i%len(palette)]
		pts := byCap[c]
		sizes := map[int][]CurvePoint{}
		var ns []int
		for _, q := range pts {
			if _, ok := sizes[q.Size]; !ok {
				ns = append(ns, q.Size)
			}
			sizes[q.Size] = append(sizes[q.Size], q)
		}
		sort.Ints(ns)
		var hold errPoints
		var train plotter.XYs
		for _, n := range ns {
			var sh, st float64
			lo, hi := math.Inf(1), math.Inf(-1)
			for _, q := range sizes[n] {
				sh += q.HoldoutErr
				st += q.TrainErr
				lo, hi = math.Min(lo, q.HoldoutErr), math.Max(hi, q.HoldoutErr)
			}
			k := float64(len(sizes[n]))
			if m := sh / k; m > 0 {
				hold.XYs = append(hold.XYs, plotter.XY{X: float64(n), Y: m})
				hold.lo = append(hold.lo, m-math.Max(lo, m*1e-3))
				hold.hi = append(hold.hi, hi-m)
			}
			if m := st / k; m > 0 {
				train = append(train, plotter.XY{X: float64(n), Y: m})
			}
		}
		name := CapacityLabel(model, c)
		if len(hold.XYs) > 0 {
			sc, err := plotter.NewScatter(hold.XYs)
			if err != nil {
				return nil, err
			}
			sc.GlyphStyle = draw.GlyphStyle{Color: col, Radius: vg.Points(2.5), Shape: draw.CircleGlyph{}}
			eb, err := plotter.NewYErrorBars(hold)
			if err != nil {
				return nil, err
			}
			eb.LineStyle.Color = col
			add(sc, eb)
			p.Legend.Add(name, sc)
		}
		if len(train) > 0 {
			sc, err := plotter.NewScatter(train)
			if err != nil {
				return nil, err
			}
			sc.GlyphStyle = draw.GlyphStyle{Color: col, Radius: vg.Points(2.5), Shape: draw.RingGlyph{}}
			add(sc)
			if i == 0 {
				p.Legend.Add("hollow: training error", sc)
			}
		}
		cr, ok := results[c]
		if !ok || cr.Result == nil {
			continue
		}
		f := cr.Result.Best
		curve := func(a, b float64) plotter.XYs {
			var xy plotter.XYs
			for j := 0; j <= 60; j++ {
				x := a * math.Pow(b/a, float64(j)/60)
				if y := Predict(f, x); y > 0 && !math.IsNaN(y) {
					xy = append(xy, plotter.XY{X: x, Y: y})
				}
			}
			return xy
		}
		if xy := curve(nMin, nMax); len(xy) > 1 {
			l, err := plotter.NewLine(xy)
			if err != nil {
				return nil, err
			}
			l.LineStyle = draw.LineStyle{Color: col, Width: vg.Points(1.2)}
			add(l)
		}
		if xy := curve(nMax, xEnd); len(xy) > 1 {
			l, err := plotter.NewLine(xy)
			if err != nil {
				return nil, err
			}
			l.LineStyle = draw.LineStyle{Color: col, Width: vg.Points(1.2), Dashes: []vg.Length{vg.Points(4), vg.Points(3)}}
			add(l)
		}
		// the pointwise bootstrap band around the curve; the asymptote's interval as a strip
		// only when there is no band (an asymptote the data do not identify gets no strip:
		// it would look like a finding)
		bp := bandFor(cr.Result, nMin, xEnd)
		if band, err := bandPolygon(bp, measMin/20, col); err != nil {
			return nil, err
		} else if band != nil {
			under = append(under, band)
			for _, b := range bp { // show the band's lower edge down to half the smallest measurement
				if b.Lo > 0 {
					yMin = math.Min(yMin, math.Max(b.Lo, measMin/2))
				}
			}
			if !bandShown { // one legend entry for every capacity's band, in neutral grey
				p.Legend.Add(fmt.Sprintf("%g%% band (bootstrap)", 100*cr.Result.Level), bandSwatch{})
				bandShown = true
			}
		} else if as := cr.Result.Asymptote; as.Method != "none" && !cr.Result.AsymptoteUnidentified && as.Hi > 0 && !math.IsInf(as.Hi, 0) {
			lo := math.Max(as.Lo, yMin/2)
			if lo < as.Hi {
				band, err := plotter.NewPolygon(plotter.XYs{{X: nMin, Y: lo}, {X: xEnd, Y: lo}, {X: xEnd, Y: as.Hi}, {X: nMin, Y: as.Hi}})
				if err != nil {
					return nil, err
				}
				band.Color = translucent(col)
				band.LineStyle.Width = 0
				under = append(under, band)
				if !stripShown {
					p.Legend.Add("asymptote interval (shaded)", band)
					stripShown = true
				}
				yMin = math.Min(yMin, lo)
			}
		}
		if ns := rep.BestNStar; ns != nil && c == rep.BestCapacity && rep.Target > 0 && ns.Est <= xEnd {
			mk, err := plotter.NewScatter(plotter.XYs{{X: ns.Est, Y: rep.Target}})
			if err != nil {
				return nil, err
			}
			mk.GlyphStyle = draw.GlyphStyle{Color: col, Radius: vg.Points(4), Shape: draw.CrossGlyph{}}
			add(mk)
			if ns.Lo > 0 && !math.IsInf(ns.Hi, 0) {
				seg, err := plotter.NewLine(plotter.XYs{{X: math.Max(ns.Lo, nMin), Y: rep.Target}, {X: math.Min(ns.Hi, xEnd), Y: rep.Target}})
				if err != nil {
					return nil, err
				}
				seg.LineStyle = draw.LineStyle{Color: col, Width: vg.Points(3)}
				add(seg)
			}
			p.Legend.Add(fmt.Sprintf("n* ≈ %.0f (%s)", math.Ceil(ns.Est), name), mk)
		}
	}
	p.Add(under...)
	p.Add(over...)
	if rep != nil && rep.Target > 0 {
		l, err := plotter.NewLine(plotter.XYs{{X: nMin, Y: rep.Target}, {X: xEnd, Y: rep.Target}})
		if err != nil {
			return nil, err
		}
		l.LineStyle = draw.LineStyle{Color: color.Gray{Y: 90}, Width: vg.Points(1), Dashes: []vg.Length{vg.Points(1), vg.Points(2)}}
		p.Add(l)
		p.Legend.Add(fmt.Sprintf("target %g", rep.Target), l)
		yMin, yMax = math.Min(yMin, rep.Target), math.Max(yMax, rep.Target)
	}
	if yMin > 0 && yMax > 0 {
		p.Y.Min, p.Y.Max = math.Max(yMin, measMin/10)/1.3, yMax*1.3
	}
	p.X.Min, p.X.Max = nMin/1.3, xEnd*1.1
	p.Add(plotter.NewGrid())
	return p, nil
}

// translucent is col at alpha 40/255, for shaded bands.
func translucent(col color.Color) color.Color {
	r, g, b, _ := col.RGBA()
	return color.NRGBA{R: uint8(r >> 8), G: uint8(g >> 8), B: uint8(b >> 8), A: 40}
}

// bandPolygon is a translucent filled polygon of colour col between the band's lower and
// upper ends (lower ends clamped at floor > 0 for the log axis; sizes whose upper end is not
// above floor, or not finite, left out); nil when fewer than two sizes remain.
func bandPolygon(band []BandPoint, floor float64, col color.Color) (*plotter.Polygon, error) {
	var upper, lower plotter.XYs
	for _, b := range band {
		if math.IsNaN(b.Lo) || math.IsNaN(b.Hi) || math.IsInf(b.Hi, 0) || math.IsInf(b.Lo, 0) || !(b.Hi > floor) {
			continue
		}
		upper = append(upper, plotter.XY{X: b.N, Y: b.Hi})
		lower = append(lower, plotter.XY{X: b.N, Y: math.Max(b.Lo, floor)})
	}
	if len(upper) < 2 {
		return nil, nil
	}
	ring := append(plotter.XYs{}, upper...)
	for i := len(lower) - 1; i >= 0; i-- {
		ring = append(ring, lower[i])
	}
	pg, err := plotter.NewPolygon(ring)
	if err != nil {
		return nil, err
	}
	pg.Color = translucent(col)
	pg.LineStyle.Width = 0
	return pg, nil
}

// bandSwatch is the legend's thumbnail for the bands: a translucent grey box.
type bandSwatch struct{}

func (bandSwatch) Thumbnail(c *draw.Canvas) {
	pts := []vg.Point{{X: c.Min.X, Y: c.Min.Y}, {X: c.Min.X, Y: c.Max.Y}, {X: c.Max.X, Y: c.Max.Y}, {X: c.Max.X, Y: c.Min.Y}}
	c.FillPolygon(color.NRGBA{R: 0x60, G: 0x60, B: 0x60, A: 70}, c.ClipPolygonY(pts))
}

// logTicks labels 1, 2 and 5 times each power of ten (minor ticks at the other integers), so
// a log axis spanning less than a decade still has labels.
type logTicks struct{}

func (logTicks) Ticks(min, max float64) []plot.Tick {
	if !(min > 0) || !(max > min) {
		return nil
	}
	var ticks []plot.Tick
	for e := math.Floor(math.Log10(min)); e <= math.Ceil(math.Log10(max)); e++ {
		base := math.Pow(10, e)
		for m := 1; m <= 9; m++ {
			v := float64(m) * base
			if v < min || v > max {
				continue
			}
			t := plot.Tick{Value: v}
			if m == 1 || m == 2 || m == 5 {
				t.Label = strconv.FormatFloat(v, 'g', 6, 64)
			}
			ticks = append(ticks, t)
		}
	}
	return ticks
}

// SavePlot writes the plot to path as SVG or PNG (by the extension), 8 × 5.5 inches.
func SavePlot(p *plot.Plot, path string) error {
	switch strings.ToLower(filepath.Ext(path)) {
	case ".svg", ".png":
	default:
		return fmt.Errorf("plot %s: the file name must end in .svg or .png", path)
	}
	return p.Save(8*vg.Inch, 5.5*vg.Inch, path)
}
