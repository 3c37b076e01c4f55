// Command gencsv writes the deterministic benchmark CSV for bench/ingest.sh: ROWS rows of an
// invented pipe-inspection log (ids, a group id, an ISO timestamp, floats, a categorical, a
// short text, a label), about 150 bytes a row. Same seed, same bytes.
package main

import (
	"bufio"
	"flag"
	"fmt"
	"math/rand/v2"
	"os"
	"strconv"
	"time"
)

func main() {
	rows := flag.Int("rows", 1_000_000, "rows to write")
	seed := flag.Uint64("seed", 1, "random seed")
	flag.Parse()
	if err := write(os.Stdout, *rows, *seed); err != nil {
		fmt.Fprintln(os.Stderr, "gencsv:", err)
		os.Exit(1)
	}
}

var (
	materials = []string{"cast_iron", "ductile_iron", "pvc", "hdpe", "asbestos_cement", "steel"}
	words     = []string{"minor", "corrosion", "joint", "seepage", "observed", "near", "valve", "crack",
		"no", "visible", "damage", "tuberculation", "heavy", "light", "at", "bend", "replaced", "gasket"}
)

func write(f *os.File, rows int, seed uint64) error {
	w := bufio.NewWriterSize(f, 1<<20)
	r := rand.New(rand.NewPCG(seed, 2))
	base := time.Date(2019, 1, 1, 0, 0, 0, 0, time.UTC)
	w.WriteString("inspection_id,segment_id,inspected_at,pressure_kpa,soil_moisture,wall_loss_pct,material,crew,note,repaired\n")
	var b []byte
	for i := 1; i <= rows; i++ {
		b = b[:0]
		b = strconv.AppendInt(b, int64(i), 10)
		b = append(b, ',')
		b = strconv.AppendInt(b, int64(1+r.IntN(200000)), 10)
		b = append(b, ',')
		b = base.Add(time.Duration(r.Int64N(6*365*24*3600))*time.Second).AppendFormat(b, time.RFC3339)
		b = append(b, ',')
		b = strconv.AppendFloat(b, 200+600*r.Float64(), 'f', 3, 64)
		b = append(b, ',')
		b = strconv.AppendFloat(b, r.Float64(), 'f', 6, 64)
		b = append(b, ',')
		b = strconv.AppendFloat(b, 40*r.Float64()*r.Float64(), 'f', 4, 64)
		b = append(b, ',')
		b = append(b, materials[r.IntN(len(materials))]...)
		b = append(b, ',')
		b = append(b, "crew-"...)
		b = strconv.AppendInt(b, int64(1+r.IntN(40)), 10)
		b = append(b, ',')
		n := 7 + r.IntN(8)
		for j := 0; j < n; j++ {
			if j > 0 {
				b = append(b, ' ')
			}
			b = append(b, words[r.IntN(len(words))]...)
		}
		b = append(b, ',')
		if r.IntN(4) == 0 {
			b = append(b, '1')
		} else {
			b = append(b, '0')
		}
		b = append(b, '\n')
		if _, err := w.Write(b); err != nil {
			return err
		}
	}
	return w.Flush()
}
