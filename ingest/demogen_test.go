package ingest

import (
	"bytes"
	"encoding/csv"
	"strconv"
	"strings"
	"testing"
)

func TestWriteDemoCSV_DeterministicAndPlanted(t *testing.T) {
	var a, b, c bytes.Buffer
	sa, err := WriteDemoCSV(&a, DemoOptions{Seed: 7})
	if err != nil {
		t.Fatal(err)
	}
	if _, err := WriteDemoCSV(&b, DemoOptions{Seed: 7}); err != nil {
		t.Fatal(err)
	}
	if !bytes.Equal(a.Bytes(), b.Bytes()) {
		t.Fatal("same seed, different output")
	}
	WriteDemoCSV(&c, DemoOptions{Seed: 8})
	if bytes.Equal(a.Bytes(), c.Bytes()) {
		t.Fatal("different seeds, same output")
	}

	recs, err := csv.NewReader(bytes.NewReader(a.Bytes())).ReadAll()
	if err != nil {
		t.Fatal(err)
	}
	if strings.Join(recs[0], ",") != strings.Join(DemoColumns, ",") {
		t.Fatalf("header %v", recs[0])
	}
	data := recs[1:]
	if len(data) != sa.Rows || sa.Rows < 10000 || sa.Rows > 15000 {
		t.Fatalf("rows %d (stats %d), want 10k–15k", len(data), sa.Rows)
	}
	col := map[string]int{}
	for i, c := range DemoColumns {
		col[c] = i
	}
	perSeg := map[string]int{}
	seen := map[string]int{}
	var copies, malformed, bad2091, invalid, leakWhenRepaired, repaired, leakWhenNot, notRepaired int
	for _, r := range data[:sa.Inspections] {
		perSeg[r[col["segment_id"]]]++
	}
	for _, r := range data {
		key := strings.Join(r, "\x00")
		if seen[key] > 0 {
			copies++
		}
		seen[key]++
	}
	for _, r := range data[:sa.Inspections] {
		m := r[col["soil_moisture"]]
		if _, err := strconv.ParseFloat(m, 64); err != nil && m != "" {
			malformed++
		}
		d := r[col["inspection_date"]]
		if strings.HasPrefix(d, "2091") {
			bad2091++
		} else if _, ok := profDate(d); !ok {
			invalid++
		}
		if r[col["repaired_365d"]] == "1" {
			repaired++
			if r[col["work_order"]] != "" {
				leakWhenRepaired++
			}
		} else {
			notRepaired++
			if r[col["work_order"]] != "" {
				leakWhenNot++
			}
		}
	}
	if len(perSeg) != 2000 {
		t.Errorf("%d segments, want 2000", len(perSeg))
	}
	for s, n := range perSeg {
		if n < 1 || n > 12 {
			t.Errorf("segment %s has %d inspections", s, n)
		}
	}
	if copies != sa.Copies || float64(copies) < 0.02*float64(sa.Rows) || float64(copies) > 0.05*float64(sa.Rows) {
		t.Errorf("copies %d (stats %d) of %d rows: want a few per cent", copies, sa.Copies, sa.Rows)
	}
	if malformed != sa.Malformed || malformed < 10 {
		t.Errorf("malformed moisture %d (stats %d)", malformed, sa.Malformed)
	}
	if bad2091+invalid != sa.ImpossibleDates || invalid != sa.InvalidDates || bad2091 == 0 || invalid == 0 {
		t.Errorf("impossible dates: 2091 %d, invalid %d, stats %+v", bad2091, invalid, sa)
	}
	// The planted leak: work orders follow the label closely.
	if float64(leakWhenRepaired)/float64(repaired) < 0.85 || float64(leakWhenNot)/float64(notRepaired) > 0.05 {
		t.Errorf("work_order filled: %d/%d repaired, %d/%d not", leakWhenRepaired, repaired, leakWhenNot, notRepaired)
	}
	if r := float64(repaired) / float64(sa.Inspections); r < 0.1 || r > 0.5 {
		t.Errorf("repair rate %.2f", r)
	}
}

func BenchmarkWriteDemoCSV(b *testing.B) {
	var buf bytes.Buffer
	for b.Loop() {
		buf.Reset()
		WriteDemoCSV(&buf, DemoOptions{Seed: 1})
	}
	b.SetBytes(int64(buf.Len()))
}
