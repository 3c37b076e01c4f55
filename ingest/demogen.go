package ingest

import (
	"encoding/csv"
	"fmt"
	"io"
	"math"
	"math/rand/v2"
	"slices"
	"strconv"
	"strings"
	"time"
)

// The demo data: an invented city water utility's pipe-inspection log. Every name, place and
// number is generated from the seed; no real utility, place or person is described.
//
// One row per inspection of a pipe segment (about 2,000 segments, 1–12 inspections each,
// 2017–2024). wall_loss_pct is a smooth nonlinear function of pipe age, operating pressure
// and soil moisture plus noise (material acts on prior breaks): the regression target. repaired_365d is
// the binary label (more likely with more wall loss and prior breaks). work_order is filled in
// mostly when a repair happened: a planted label leak. Also planted: twice-imported rows
// (exact copies appended as a second import), notes copied and lightly edited from the
// segment's earlier notes (near-duplicates), missing values, malformed soil moisture ("7,4",
// "n/a?"), material spellings differing in case or whitespace, and impossible inspection
// dates (2019-02-30; a year 2091 typed for 2019).

// DemoColumns are the demo CSV's columns, in order.
var DemoColumns = []string{
	"inspection_id", "segment_id", "crew_id", "inspection_date", "material", "diameter_mm",
	"install_year", "pressure_kpa", "soil_moisture", "prior_breaks", "note",
	"wall_loss_pct", "repaired_365d", "work_order",
}

// DemoOptions size the demo data. Zero values take the defaults.
type DemoOptions struct {
	Seed     uint64
	Segments int // default 2000
}

// DemoStats describe what WriteDemoCSV planted, for the demo's summary and for tests.
type DemoStats struct {
	Rows            int // data rows written (header excluded), copies included
	Segments        int
	Inspections     int // distinct inspections (rows before the twice-imported copies)
	Copies          int // twice-imported rows: exact copies of earlier rows
	Malformed       int // soil_moisture values that are not numbers nor missing
	ImpossibleDates int // calendar-invalid dates (2019-02-30) and year-2091 typos
	InvalidDates    int // of which calendar-invalid
	Repaired        int // inspections with repaired_365d = 1
	LeakFilled      int // inspections with a work_order
}

type demoSegment struct {
	id          string
	material    string
	diameter    int
	install     int
	pressure    float64 // base operating pressure, kPa
	moisture    float64 // base soil moisture, %
	breakRate   float64
	inspections int
}

var demoMaterials = []struct {
	name        string
	from, to    int // install years
	breaks      float64
	weight      float64
	variantCase string // a spelling variant planted now and then
}{
	{"cast iron", 1905, 1965, 1.6, 0.30, "Cast Iron"},
	{"ductile iron", 1960, 2015, 0.8, 0.25, "ductile iron "},
	{"steel", 1930, 1985, 1.2, 0.10, "Steel"},
	{"asbestos cement", 1940, 1980, 1.0, 0.10, "Asbestos Cement"},
	{"PVC", 1970, 2018, 0.5, 0.18, "pvc"},
	{"HDPE", 1985, 2018, 0.3, 0.07, " HDPE"},
}

var demoDiameters = []int{100, 150, 150, 200, 200, 250, 300, 400, 600}

var demoStreets = []string{"Alder", "Birchwood", "Cobalt", "Dunmore", "Elmstead", "Fenwick", "Garnet", "Hollis", "Ivyridge", "Juniper",
	"Kestrel", "Larkspur", "Marlow", "Netherby", "Orchard", "Pellham", "Quarry", "Rowan", "Sable", "Thistle", "Umber", "Vale", "Wexley", "Yarrow"}

var demoFindings = []string{
	"minor external corrosion near the joint", "tuberculation inside the barrel", "coating intact", "pitting on the crown",
	"seepage at the bell joint", "graphitization suspected at the invert", "no visible defects", "scale buildup reducing flow",
	"soft spot found with hammer test", "service connection weeping", "joint gasket displaced", "exposed rebar on the outer wall",
	"longitudinal hairline crack", "circumferential crack near the tee", "sediment at the low point", "valve box damaged",
}

var demoActions = []string{
	"recommend re-inspection in 12 months", "monitor", "schedule relining", "flag for replacement review",
	"no action", "clamp applied as temporary fix", "notify district engineer", "add to flushing program",
}

// WriteDemoCSV writes the demo log as CSV (header first) to w. The output is a pure function
// of the options: math/rand/v2's PCG seeded from Seed, no clock.
func WriteDemoCSV(w io.Writer, opt DemoOptions) (DemoStats, error) {
	if opt.Segments <= 0 {
		opt.Segments = 2000
	}
	r := rand.New(rand.NewPCG(opt.Seed, opt.Seed^0x9e3779b97f4a7c15))
	norm := func() float64 { // Box–Muller from two uniforms: stable across Go releases
		u1 := 1 - r.Float64()
		u2 := r.Float64()
		return math.Sqrt(-2*math.Log(u1)) * math.Cos(2*math.Pi*u2)
	}
	poisson := func(lambda float64) int { // Knuth's method; lambda is small here
		l, k, p := math.Exp(-lambda), 0, 1.0
		for {
			p *= r.Float64()
			if p <= l {
				return k
			}
			k++
		}
	}
	var totalWeight float64
	for _, m := range demoMaterials {
		totalWeight += m.weight
	}
	segs := make([]demoSegment, opt.Segments)
	for i := range segs {
		u, mi := r.Float64()*totalWeight, 0
		for mi < len(demoMaterials)-1 && u > demoMaterials[mi].weight {
			u -= demoMaterials[mi].weight
			mi++
		}
		m := demoMaterials[mi]
		segs[i] = demoSegment{
			id:          fmt.Sprintf("SEG-%05d", 10000+i*7+r.IntN(7)),
			material:    m.name,
			diameter:    demoDiameters[r.IntN(len(demoDiameters))],
			install:     m.from + r.IntN(m.to-m.from+1),
			pressure:    350 + 400*r.Float64(),
			moisture:    8 + 30*r.Float64(),
			breakRate:   m.breaks * (0.02 + 0.04*r.Float64()),
			inspections: 1 + r.IntN(12),
		}
	}

	// Each segment's inspection dates, spread over 2017–2024, in order.
	type insp struct {
		seg   int
		day   int // days since 2017-01-01
		k     int // 0-based inspection number within the segment
		crew  int
		notes string
	}
	start := time.Date(2017, 1, 1, 0, 0, 0, 0, time.UTC)
	const span = 8 * 365
	var all []insp
	for si, s := range segs {
		days := make([]int, s.inspections)
		for k := range days {
			days[k] = r.IntN(span)
		}
		slices.Sort(days)
		crew := r.IntN(24)
		for k, d := range days {
			if r.Float64() < 0.3 {
				crew = r.IntN(24)
			}
			all = append(all, insp{seg: si, day: d, k: k, crew: crew})
		}
	}
	slices.SortStableFunc(all, func(a, b insp) int {
		if a.day != b.day {
			return a.day - b.day
		}
		return a.seg - b.seg
	})

	cw := csv.NewWriter(w)
	if err := cw.Write(DemoColumns); err != nil {
		return DemoStats{}, err
	}
	st := DemoStats{Segments: opt.Segments}
	lastNote := make([]string, len(segs))
	breaks := make([]int, len(segs))
	var records [][]string
	for i, in := range all {
		s := segs[in.seg]
		date := start.AddDate(0, 0, in.day)
		age := float64(date.Year() - s.install)
		if age < 0 {
			age = 0
		}
		pressure := s.pressure + 25*norm()
		moisture := math.Max(2, s.moisture+3*norm())
		breaks[in.seg] += poisson(s.breakRate * age / 10)
		// Smooth nonlinear target of age, pressure and moisture only (a power of age,
		// saturating pressure and moisture effects); material acts through prior breaks.
		wall := 9 * math.Pow(age/40, 1.5) * (0.6 + 0.8/(1+math.Exp(-(pressure-550)/80))) * (0.5 + moisture/30)
		wall += 2.2 * norm()
		wall = math.Max(0, math.Min(95, wall))
		logit := -4.2 + 0.11*wall + 0.45*float64(breaks[in.seg])
		repaired := r.Float64() < 1/(1+math.Exp(-logit))

		rec := make([]string, len(DemoColumns))
		rec[0] = strconv.Itoa(100001 + i)
		rec[1] = s.id
		rec[2] = fmt.Sprintf("C%02d", in.crew+1)
		rec[3] = date.Format("2006-01-02")
		rec[4] = s.material
		if r.Float64() < 0.006 {
			for _, m := range demoMaterials {
				if m.name == s.material {
					rec[4] = m.variantCase
				}
			}
		}
		rec[5] = strconv.Itoa(s.diameter)
		if r.Float64() < 0.005 {
			rec[5] = ""
		}
		rec[6] = strconv.Itoa(s.install)
		rec[7] = strconv.FormatFloat(math.Round(pressure*10)/10, 'f', 1, 64)
		rec[8] = strconv.FormatFloat(moisture, 'f', 1, 64)
		switch u := r.Float64(); {
		case u < 0.010:
			rec[8] = ""
		case u < 0.012:
			rec[8] = strings.Replace(rec[8], ".", ",", 1) // "7,4": a decimal comma
			st.Malformed++
		case u < 0.013:
			rec[8] = "n/a?"
			st.Malformed++
		}
		rec[9] = strconv.Itoa(breaks[in.seg])
		rec[10] = demoNote(r, s, in.k, lastNote[in.seg])
		lastNote[in.seg] = rec[10]
		if r.Float64() < 0.01 {
			rec[10] = ""
		}
		rec[11] = strconv.FormatFloat(wall, 'f', 2, 64)
		if repaired {
			rec[12] = "1"
			st.Repaired++
		} else {
			rec[12] = "0"
		}
		if repaired && r.Float64() < 0.92 || !repaired && r.Float64() < 0.015 {
			rec[13] = fmt.Sprintf("WO-%d-%05d", date.Year(), r.IntN(100000))
			st.LeakFilled++
		}
		records = append(records, rec)
	}
	// A handful of impossible dates: calendar-invalid days and a year 2091 typed for 2019.
	for _, bad := range []string{"2019-02-30", "2021-04-31", "2023-02-29"} {
		i := r.IntN(len(records))
		records[i][3] = bad
		st.InvalidDates++
		st.ImpossibleDates++
	}
	for n := 0; n < 4; {
		i := r.IntN(len(records))
		if strings.HasPrefix(records[i][3], "2019-") {
			records[i][3] = "2091" + records[i][3][4:]
			st.ImpossibleDates++
			n++
		}
	}
	st.Inspections = len(records)
	// Twice-imported rows: three blocks of one day's export, appended again as a second import.
	for b := 0; b < 3; b++ {
		at := r.IntN(len(all) - 200)
		n := 100 + r.IntN(60)
		for _, rec := range records[at : at+n] {
			records = append(records, slices.Clone(rec))
			st.Copies++
		}
	}
	for _, rec := range records {
		if err := cw.Write(rec); err != nil {
			return st, err
		}
	}
	cw.Flush()
	st.Rows = len(records)
	return st, cw.Error()
}

// demoNote writes an inspector's note; later inspections often copy the previous note of the
// segment with light edits (so notes become near-duplicates within a segment).
func demoNote(r *rand.Rand, s demoSegment, k int, prev string) string {
	if prev != "" && r.Float64() < 0.65 {
		switch r.IntN(4) {
		case 0:
			return "Rechecked: " + prev
		case 1:
			return prev + "; " + demoActions[r.IntN(len(demoActions))]
		case 2:
			return strings.Replace(prev, demoFindings[r.IntN(len(demoFindings))], demoFindings[r.IntN(len(demoFindings))], 1)
		default:
			return strings.Replace(prev, "  ", " ", -1) + "."
		}
	}
	street := demoStreets[r.IntN(len(demoStreets))]
	f1 := demoFindings[r.IntN(len(demoFindings))]
	f2 := demoFindings[r.IntN(len(demoFindings))]
	act := demoActions[r.IntN(len(demoActions))]
	return fmt.Sprintf("%s main under %s St, %d mm: %s, %s; %s", s.material, street, s.diameter, f1, f2, act)
}
