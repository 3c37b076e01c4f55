package estimate

import (
	"bytes"
	"math"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"gonum.org/v1/plot/vg"
)

// A curve plot renders, is byte-identical when rendered twice (no clock or randomness), and
// carries its title and the target in the legend; SavePlot refuses other formats.
func TestPlotCurves_DeterministicSVG(t *testing.T) {
	var pts []CurvePoint
	for _, c := range []float64{1, 2} {
		for _, n := range []int{50, 100, 200, 400, 800} {
			for r := 1; r <= 3; r++ {
				h := c*0.2 + 3/math.Sqrt(float64(n))*float64(3-c) + 0.01*float64(r)
				pts = append(pts, CurvePoint{Capacity: c, Size: n, Repeat: r, TrainErr: 0.8 * h, HoldoutErr: h})
			}
		}
	}
	rep, err := Summarise(pts, "ridge", "mse", 800, &Options{Target: 0.4, Bootstrap: 50, Families: []string{"pow3"}})
	if err != nil {
		t.Fatal(err)
	}
	render := func() []byte {
		p, err := PlotCurves(pts, rep, PlotOptions{Title: "wall loss on split sound", YLabel: "mse"})
		if err != nil {
			t.Fatal(err)
		}
		w, err := p.WriterTo(6*vg.Inch, 4*vg.Inch, "svg")
		if err != nil {
			t.Fatal(err)
		}
		var b bytes.Buffer
		if _, err := w.WriteTo(&b); err != nil {
			t.Fatal(err)
		}
		return b.Bytes()
	}
	a, b := render(), render()
	if !bytes.Equal(a, b) {
		t.Error("two renderings differ")
	}
	for _, want := range []string{"wall loss on split sound", "target 0.4", "degree 2", "95% band (bootstrap)"} {
		if !strings.Contains(string(a), want) {
			t.Errorf("SVG lacks %q", want)
		}
	}
	p, _ := PlotCurves(pts, rep, PlotOptions{})
	dir := t.TempDir()
	if err := SavePlot(p, filepath.Join(dir, "c.png")); err != nil {
		t.Fatal(err)
	}
	if st, err := os.Stat(filepath.Join(dir, "c.png")); err != nil || st.Size() == 0 {
		t.Errorf("png not written: %v", err)
	}
	if err := SavePlot(p, filepath.Join(dir, "c.pdf")); err == nil {
		t.Error("SavePlot accepted .pdf")
	}
}
