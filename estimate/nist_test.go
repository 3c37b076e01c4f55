package estimate

import (
	"bufio"
	"math"
	"os"
	"path/filepath"
	"regexp"
	"strconv"
	"strings"
	"testing"
)

// nistFile is one NIST StRD dataset read from testdata/nist (see its README for provenance).
type nistFile struct {
	Name    string
	Start1  []float64 // nonlinear only
	Start2  []float64
	Cert    []float64 // certified parameters
	CertSD  []float64 // certified standard deviations of the estimates
	RSS     float64   // certified residual sum of squares (nonlinear)
	ResidSD float64   // certified residual standard deviation
	R2      float64   // certified R² (linear)
	Y       []float64
	X       [][]float64 // one row per observation, predictors in file order
}

var fmtLines = regexp.MustCompile(`\(lines\s+(\d+)\s+to\s+(\d+)\)`)

func readNIST(t testing.TB, name string) *nistFile {
	t.Helper()
	b, err := os.ReadFile(filepath.Join("testdata", "nist", name+".dat"))
	if err != nil {
		t.Fatal(err)
	}
	var lines []string
	sc := bufio.NewScanner(strings.NewReader(string(b)))
	for sc.Scan() {
		lines = append(lines, strings.TrimRight(sc.Text(), "\r"))
	}
	f := &nistFile{Name: name}
	var certFrom, certTo, dataFrom, dataTo int
	for _, l := range lines[:12] {
		m := fmtLines.FindStringSubmatch(l)
		if m == nil {
			continue
		}
		a, _ := strconv.Atoi(m[1])
		z, _ := strconv.Atoi(m[2])
		switch {
		case strings.Contains(l, "Certified Values"):
			certFrom, certTo = a, z
		case strings.Contains(l, "Data"):
			dataFrom, dataTo = a, z
		}
	}
	num := func(s string) float64 {
		v, err := strconv.ParseFloat(s, 64)
		if err != nil {
			t.Fatalf("%s: %q: %v", name, s, err)
		}
		return v
	}
	nonlinear := strings.Contains(string(b), "Nonlinear Least Squares")
	for _, l := range lines[certFrom-1 : certTo] {
		fs := strings.Fields(l)
		switch {
		case len(fs) >= 3 && nonlinear && len(fs) == 6 && fs[1] == "=":
			f.Start1 = append(f.Start1, num(fs[2]))
			f.Start2 = append(f.Start2, num(fs[3]))
			f.Cert = append(f.Cert, num(fs[4]))
			f.CertSD = append(f.CertSD, num(fs[5]))
		case !nonlinear && len(fs) == 3 && regexp.MustCompile(`^B\d+$`).MatchString(fs[0]):
			f.Cert = append(f.Cert, num(fs[1]))
			f.CertSD = append(f.CertSD, num(fs[2]))
		case strings.HasPrefix(strings.TrimSpace(l), "Residual Sum of Squares:"):
			f.RSS = num(fs[len(fs)-1])
		case strings.HasPrefix(strings.TrimSpace(l), "Residual Standard Deviation:"):
			f.ResidSD = num(fs[len(fs)-1])
		case len(fs) == 3 && fs[0] == "Standard" && fs[1] == "Deviation":
			f.ResidSD = num(fs[2])
		case len(fs) == 2 && fs[0] == "R-Squared":
			f.R2 = num(fs[1])
		}
	}
	for _, l := range lines[dataFrom-1 : dataTo] {
		fs := strings.Fields(l)
		if len(fs) < 2 {
			continue
		}
		f.Y = append(f.Y, num(fs[0]))
		row := make([]float64, len(fs)-1)
		for i, s := range fs[1:] {
			row[i] = num(s)
		}
		f.X = append(f.X, row)
	}
	if len(f.Cert) == 0 || len(f.Y) == 0 {
		t.Fatalf("%s: parsed no certified values or no data", name)
	}
	return f
}

// sigDigits returns the number of agreeing significant digits, −log10(|got−want|/|want|)
// (the log relative error, LRE, NIST's own measure), capped at 15; for want = 0 it is
// −log10|got|.
func sigDigits(got, want float64) float64 {
	if got == want {
		return 15
	}
	var d float64
	if want == 0 {
		d = -math.Log10(math.Abs(got))
	} else {
		d = -math.Log10(math.Abs(got-want) / math.Abs(want))
	}
	return math.Min(d, 15)
}

func (f *nistFile) col(j int) []float64 {
	out := make([]float64, len(f.X))
	for i, r := range f.X {
		out[i] = r[j]
	}
	return out
}
