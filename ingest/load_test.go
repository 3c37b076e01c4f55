package ingest

import (
	"bytes"
	"compress/gzip"
	"context"
	"database/sql"
	"errors"
	"fmt"
	"os"
	"path/filepath"
	"reflect"
	"strings"
	"testing"

	"splitsmith/internal/sqlfn"
	"splitsmith/internal/store"
)

func loadInto(t testing.TB, path string, inputs []Input, opts Options) (*Result, error) {
	t.Helper()
	var res *Result
	err := store.Update(context.Background(), path, store.Options{SQL: []sqlfn.Set{SQL()}}, true, store.Run{Command: "ingest"},
		func(ctx context.Context, tx *store.Tx) error {
			opts.RunID = tx.RunID
			opts.CheckName = store.CheckUserName
			r, err := Load(ctx, tx.Conn, inputs, opts)
			res = r
			return err
		})
	return res, err
}

func csvIn(name, s string) Input { return Input{Name: name, Reader: strings.NewReader(s)} }

func openDB(t testing.TB, path string) *store.DB {
	t.Helper()
	db, err := store.Open(context.Background(), path, store.Options{SQL: []sqlfn.Set{SQL()}, ReadOnly: true})
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() { db.Close() })
	return db
}

func query(t testing.TB, db *sql.DB, q string, args ...any) [][]any {
	t.Helper()
	rows, err := db.Query(q, args...)
	if err != nil {
		t.Fatalf("%s: %v", q, err)
	}
	defer rows.Close()
	cols, _ := rows.Columns()
	var out [][]any
	for rows.Next() {
		vals := make([]any, len(cols))
		ptrs := make([]any, len(cols))
		for i := range vals {
			ptrs[i] = &vals[i]
		}
		if err := rows.Scan(ptrs...); err != nil {
			t.Fatal(err)
		}
		out = append(out, vals)
	}
	if err := rows.Err(); err != nil {
		t.Fatal(err)
	}
	return out
}

const pipesCSV = "id,segment,inspected,depth,ok,code,note\r\n" +
	"1,12,2024-03-01T08:15:00Z,1.5,true,00123,\"hello, world\"\r\n" +
	"2,12,2024-03-02T09:00:00Z,2,false,00124,\"two\r\nlines\"\r\n" +
	"3,7,NA,,TRUE,0,\"say \"\"hi\"\"\"\r\n"

func TestLoad_TypesValuesAndSystemColumns(t *testing.T) {
	path := filepath.Join(t.TempDir(), "t.db")
	res, err := loadInto(t, path, []Input{csvIn("pipes.csv", pipesCSV)}, Options{})
	if err != nil {
		t.Fatal(err)
	}
	if res.Table != "pipes" || res.Rows != 3 || res.FirstRow != 1 || res.Passes != 1 && prefixRecords > 3 {
		t.Fatalf("result %+v", res)
	}
	var types []string
	for _, c := range res.Columns {
		types = append(types, c.Type.String())
	}
	if want := []string{"INTEGER", "INTEGER", "TIMESTAMP", "REAL", "BOOLEAN", "TEXT", "TEXT"}; !reflect.DeepEqual(types, want) {
		t.Errorf("types %v, want %v", types, want)
	}
	db := openDB(t, path)
	got := query(t, db.DB, `SELECT ss_row, ss_source, ss_line, id, typeof(segment), inspected, depth, typeof(depth), ok, code, note FROM pipes ORDER BY ss_row`)
	want := [][]any{
		{int64(1), "pipes.csv", int64(2), int64(1), "integer", "2024-03-01T08:15:00Z", 1.5, "real", int64(1), "00123", "hello, world"},
		{int64(2), "pipes.csv", int64(3), int64(2), "integer", "2024-03-02T09:00:00Z", 2.0, "real", int64(0), "00124", "two\r\nlines"},
		{int64(3), "pipes.csv", int64(5), int64(3), "integer", nil, nil, "null", int64(1), "0", `say "hi"`},
	}
	if !reflect.DeepEqual(got, want) {
		t.Errorf("rows\n got %v\nwant %v", got, want)
	}
	cols := query(t, db.DB, `SELECT name, logical_type, sql_type, missing FROM ss_columns WHERE table_name='pipes' ORDER BY position`)
	if cols[2][3] != int64(1) || cols[3][3] != int64(1) || cols[4][2] != "INTEGER" {
		t.Errorf("ss_columns %v", cols)
	}
	src := query(t, db.DB, `SELECT path, size, sha256, format, rows_loaded FROM ss_sources`)
	if len(src) != 1 || src[0][1] != int64(len(pipesCSV)) || src[0][4] != int64(3) || len(src[0][2].(string)) != 64 {
		t.Errorf("ss_sources %v", src)
	}
}

// Every stored row's ss_digest equals Digest over its stored values (Go), and equals
// ingest_digest over its columns (SQL), so the stored audit query returns nothing.
func TestLoad_DigestGoEqualsSQL(t *testing.T) {
	path := filepath.Join(t.TempDir(), "t.db")
	res, err := loadInto(t, path, []Input{csvIn("pipes.csv", pipesCSV)}, Options{})
	if err != nil {
		t.Fatal(err)
	}
	db := openDB(t, path)
	if bad := query(t, db.DB, res.DigestCheckSQL); len(bad) != 0 {
		t.Errorf("digest check returned %v", bad)
	}
	for _, r := range query(t, db.DB, `SELECT * FROM pipes`) {
		want, err := Digest(r[5:]...)
		if err != nil {
			t.Fatal(err)
		}
		if r[3] != want {
			t.Errorf("row %v: ss_digest %v, Go digest %d", r[0], r[3], want)
		}
	}
	// SQL ≡ Go on mixed values, including the hashlib reference rows of digest_test.go.
	for _, vals := range [][]any{{int64(42), "río", nil, 0.1}, {}, {"abc"}, {int64(-1), 1e300, "", nil}} {
		var ph []string
		for range vals {
			ph = append(ph, "?")
		}
		var got int64
		if err := db.QueryRow(`SELECT ingest_digest(`+strings.Join(ph, ",")+`)`, vals...).Scan(&got); err != nil {
			t.Fatal(err)
		}
		want, _ := Digest(vals...)
		if got != want {
			t.Errorf("ingest_digest%v = %d, Go %d", vals, got, want)
		}
	}
}

func TestSQL_InferTypeAndNormEqualGo(t *testing.T) {
	path := filepath.Join(t.TempDir(), "t.db")
	if _, err := loadInto(t, path, []Input{csvIn("x.csv", "a\n1\n")}, Options{}); err != nil {
		t.Fatal(err)
	}
	db := openDB(t, path)
	for _, s := range []string{"42", "00123", "1.5", "true", "2024-03-01", "2024-03-01 08:15", "calm", "NA", "", "  Cast  IRON "} {
		var typ, norm sql.NullString
		if err := db.QueryRow(`SELECT ingest_infer_type(?), ingest_norm(?)`, s, s).Scan(&typ, &norm); err != nil {
			t.Fatal(err)
		}
		want := "MISSING"
		if tt, ok := InferValue(s, nil); ok {
			want = tt.String()
		}
		if typ.String != want || norm.String != NormalizeText(s) {
			t.Errorf("%q: SQL %q %q, Go %q %q", s, typ.String, norm.String, want, NormalizeText(s))
		}
	}
	var n sql.NullString
	db.QueryRow(`SELECT ingest_infer_type(NULL)`).Scan(&n)
	if n.Valid {
		t.Errorf("ingest_infer_type(NULL) = %q, want NULL", n.String)
	}
}

func TestLoad_SeveralInputsOneTable(t *testing.T) {
	path := filepath.Join(t.TempDir(), "t.db")
	res, err := loadInto(t, path, []Input{csvIn("train.csv", "a,b\n1,x\n2,y\n"), csvIn("test.csv", "a,b\n3.5,z\n")}, Options{Table: "pipes"})
	if err != nil {
		t.Fatal(err)
	}
	if res.Rows != 3 || res.Columns[0].Type != TypeReal {
		t.Errorf("result %+v", res)
	}
	got := query(t, openDB(t, path).DB, `SELECT ss_row, ss_source, ss_line, a FROM pipes ORDER BY ss_row`)
	want := [][]any{{int64(1), "train.csv", int64(2), 1.0}, {int64(2), "train.csv", int64(3), 2.0}, {int64(3), "test.csv", int64(2), 3.5}}
	if !reflect.DeepEqual(got, want) {
		t.Errorf("got %v want %v", got, want)
	}
	_, err = loadInto(t, filepath.Join(t.TempDir(), "u.db"), []Input{csvIn("train.csv", "a,b\n1,x\n"), csvIn("test.csv", "a,c\n3,z\n")}, Options{Table: "pipes"})
	if err == nil || err.Error() != `test.csv:1: columns differ from train.csv: column 2 is "c" here, "b" there` {
		t.Errorf("err = %v", err)
	}
}

func TestLoad_AppendReplaceRefuse(t *testing.T) {
	path := filepath.Join(t.TempDir(), "t.db")
	if _, err := loadInto(t, path, []Input{csvIn("a.csv", "n,s\n1,x\n2,y\n")}, Options{Table: "t"}); err != nil {
		t.Fatal(err)
	}
	_, err := loadInto(t, path, []Input{csvIn("b.csv", "n,s\n3,z\n")}, Options{Table: "t"})
	var u *UsageError
	if !errors.As(err, &u) || !strings.Contains(err.Error(), `table "t" already exists (2 rows)`) {
		t.Fatalf("err = %v", err)
	}
	res, err := loadInto(t, path, []Input{csvIn("b.csv", "n,s\n3,z\n007,w\n")}, Options{Table: "t", Append: true})
	if err != nil {
		t.Fatal(err)
	}
	if res.FirstRow != 3 || res.Rows != 2 {
		t.Errorf("append result %+v", res)
	}
	got := query(t, openDB(t, path).DB, `SELECT ss_row, ss_source, n FROM t ORDER BY ss_row`)
	if want := [][]any{{int64(1), "a.csv", int64(1)}, {int64(2), "a.csv", int64(2)}, {int64(3), "b.csv", int64(3)}, {int64(4), "b.csv", int64(7)}}; !reflect.DeepEqual(got, want) {
		t.Errorf("after append %v", got)
	}
	_, err = loadInto(t, path, []Input{csvIn("c.csv", "n,s\nabc,z\n")}, Options{Table: "t", Append: true})
	if err == nil || err.Error() != `c.csv:2: column "n": cannot parse "abc" as INTEGER` {
		t.Errorf("append of a bad value: %v", err)
	}
	_, err = loadInto(t, path, []Input{csvIn("c.csv", "n,x\n1,z\n")}, Options{Table: "t", Append: true})
	if err == nil || err.Error() != `c.csv:1: columns differ from table "t": column 2 is "x" here, "s" there` {
		t.Errorf("append of other columns: %v", err)
	}
	res, err = loadInto(t, path, []Input{csvIn("c.csv", "q\nhello\n")}, Options{Table: "t", Replace: true})
	if err != nil {
		t.Fatal(err)
	}
	got = query(t, openDB(t, path).DB, `SELECT ss_row, q FROM t`)
	if !reflect.DeepEqual(got, [][]any{{int64(1), "hello"}}) {
		t.Errorf("after replace %v", got)
	}
}

func TestLoad_JSONL(t *testing.T) {
	path := filepath.Join(t.TempDir(), "t.db")
	in := `{"id": 1, "material": "pvc", "depth": 1.5, "tags": ["a", "b"], "ok": true}` + "\n" +
		"\n" +
		`{"id": 2, "depth": null, "ok": false}` + "\n" +
		`{"material": "cast iron", "id": 3, "tags": {"k": 1}}` + "\n"
	res, err := loadInto(t, path, []Input{{Name: "log.jsonl", Reader: strings.NewReader(in)}}, Options{})
	if err != nil {
		t.Fatal(err)
	}
	if res.Rows != 3 || res.Columns[0].Type != TypeInteger || res.Columns[2].Type != TypeReal || res.Columns[4].Type != TypeBoolean {
		t.Errorf("result %+v", res.Columns)
	}
	got := query(t, openDB(t, path).DB, `SELECT ss_line, id, material, depth, tags, ok FROM log ORDER BY ss_row`)
	want := [][]any{
		{int64(1), int64(1), "pvc", 1.5, `["a","b"]`, int64(1)},
		{int64(3), int64(2), nil, nil, nil, int64(0)},
		{int64(4), int64(3), "cast iron", nil, `{"k":1}`, nil},
	}
	if !reflect.DeepEqual(got, want) {
		t.Errorf("got %v\nwant %v", got, want)
	}
	_, err = loadInto(t, path, []Input{{Name: "bad.jsonl", Reader: strings.NewReader(`{"id": 1}` + "\n" + `{"id": 2, "extra": 3}` + "\n")}}, Options{})
	if err == nil || err.Error() != `bad.jsonl:2: key "extra" is not a column (columns come from the first object)` {
		t.Errorf("unknown key: %v", err)
	}
	_, err = loadInto(t, path, []Input{{Name: "bad.jsonl", Reader: strings.NewReader(`{"id": 1}` + "\n" + `[2]` + "\n")}}, Options{})
	if err == nil || err.Error() != `bad.jsonl:2: not a JSON object (a JSON Lines input needs one object per line)` {
		t.Errorf("array line: %v", err)
	}
}

func TestLoad_GzipAndTSV(t *testing.T) {
	var gz bytes.Buffer
	zw := gzip.NewWriter(&gz)
	zw.Write([]byte("a\tb\n1\t\"q\"\n2\tx\n"))
	zw.Close()
	dir := t.TempDir()
	file := filepath.Join(dir, "p.tsv.gz")
	if err := os.WriteFile(file, gz.Bytes(), 0o644); err != nil {
		t.Fatal(err)
	}
	path := filepath.Join(dir, "t.db")
	res, err := loadInto(t, path, []Input{{Name: file}}, Options{})
	if err != nil {
		t.Fatal(err)
	}
	if res.Table != "p" || res.Rows != 2 || !res.Sources[0].Gzip || res.Sources[0].Size != int64(gz.Len()) {
		t.Errorf("result %+v %+v", res, res.Sources)
	}
	got := query(t, openDB(t, path).DB, `SELECT a, b FROM p ORDER BY ss_row`)
	if !reflect.DeepEqual(got, [][]any{{int64(1), `"q"`}, {int64(2), "x"}}) {
		t.Errorf("got %v", got)
	}
}

func TestLoad_OnError(t *testing.T) {
	in := "a,b\n1,x\n2\n3,\"un\"closed\n4,caf\xe9\nabc,y\n6,z\n"
	for _, mode := range []string{"fail", "skip", "quarantine"} {
		t.Run(mode, func(t *testing.T) {
			path := filepath.Join(t.TempDir(), "t.db")
			res, err := loadInto(t, path, []Input{csvIn("in.csv", in)}, Options{Table: "t", OnError: mode, Schema: map[string]Type{"a": TypeInteger}})
			if mode == "fail" {
				if err == nil || err.Error() != "in.csv:3: ragged row: 1 fields, the header has 2" {
					t.Errorf("err = %v", err)
				}
				if _, serr := os.Stat(path); serr == nil {
					t.Errorf("a failed load into a fresh target left %s", path)
				}
				return
			}
			if err != nil {
				t.Fatal(err)
			}
			if res.Rows != 2 || res.Skipped+res.Rejected != 4 || len(res.Problems) != 4 {
				t.Fatalf("result %+v", res)
			}
			var msgs []string
			for _, p := range res.Problems {
				msgs = append(msgs, p.Error())
			}
			want := []string{
				"in.csv:3: ragged row: 1 fields, the header has 2",
				`in.csv:4: column "b": bad quoting: unexpected 'c' after the closing quote of field 2`,
				`in.csv:5: column "b": invalid UTF-8 at byte 4`,
				`in.csv:6: column "a": cannot parse "abc" as INTEGER`,
			}
			if !reflect.DeepEqual(msgs, want) {
				t.Errorf("problems\n got %q\nwant %q", msgs, want)
			}
			db := openDB(t, path)
			rej := query(t, db.DB, `SELECT source, line, column_name, value, reason, raw FROM ss_rejects ORDER BY line`)
			if mode == "skip" {
				if len(rej) != 0 {
					t.Errorf("skip stored rejects %v", rej)
				}
				return
			}
			wantRej := [][]any{
				{"in.csv", int64(3), nil, nil, "ragged row: 1 fields, the header has 2", "2"},
				{"in.csv", int64(4), "b", nil, "bad quoting: unexpected 'c' after the closing quote of field 2", `3,"un"closed`},
				{"in.csv", int64(5), "b", "caf\uFFFD", "invalid UTF-8 at byte 4", "4,caf\xe9"},
				{"in.csv", int64(6), "a", "abc", `cannot parse "abc" as INTEGER`, "abc,y"},
			}
			if !reflect.DeepEqual(rej, wantRej) {
				t.Errorf("ss_rejects\n got %q\nwant %q", rej, wantRej)
			}
			if got := query(t, db.DB, `SELECT ss_row, ss_line, a FROM t ORDER BY ss_row`); !reflect.DeepEqual(got, [][]any{{int64(1), int64(2), int64(1)}, {int64(2), int64(7), int64(6)}}) {
				t.Errorf("rows %v", got)
			}
		})
	}
}

func TestLoad_HeaderProblems(t *testing.T) {
	tests := []struct{ name, in, want string }{
		{"empty", "", "x.csv: empty input: no header line"},
		{"blank lines only", "\n\r\n", "x.csv: empty input: no header line"},
		{"header only", "a,b\r\n", "x.csv:1: header only: no data rows"},
		{"duplicate", "a,b,A\n1,2,3\n", `x.csv:1: duplicate column name "A" (columns 1 and 3; names are compared ignoring case)`},
		{"empty name", "a,,c\n1,2,3\n", "x.csv:1: column 2 has an empty name"},
		{"reserved", "a,ss_row\n1,2\n", `x.csv:1: column 2: column name "ss_row" is reserved: names starting with ss_ belong to splitsmith`},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			_, err := loadInto(t, filepath.Join(t.TempDir(), "t.db"), []Input{csvIn("x.csv", tt.in)}, Options{OnError: "skip"})
			if err == nil || err.Error() != tt.want {
				t.Errorf("err = %v, want %s", err, tt.want)
			}
		})
	}
}

// benchCSV writes n rows like bench/ingest.sh's input (fewer of them).
func benchCSV(tb testing.TB, n int) string {
	tb.Helper()
	var b strings.Builder
	b.WriteString("inspection_id,segment_id,inspected_at,pressure_kpa,soil_moisture,wall_loss_pct,material,crew,note,repaired\n")
	mats := []string{"cast_iron", "ductile_iron", "pvc", "hdpe"}
	for i := 1; i <= n; i++ {
		fmt.Fprintf(&b, "%d,%d,2021-%02d-%02dT%02d:15:00Z,%.3f,%.6f,%.4f,%s,crew-%d,minor corrosion near joint %d observed,%d\n",
			i, i%2000, 1+i%12, 1+i%28, i%24, 200+float64(i%600), float64(i%1000)/1000, float64(i%4000)/100, mats[i%4], i%40, i%97, i%4/3)
	}
	path := filepath.Join(tb.TempDir(), "bench.csv")
	if err := os.WriteFile(path, []byte(b.String()), 0o644); err != nil {
		tb.Fatal(err)
	}
	return path
}

// BenchmarkLoad loads 50,000 rows into a fresh file per iteration (rows/s reported);
// bench/ingest.sh compares the full-size load with the sqlite3 CLI.
func BenchmarkLoad(b *testing.B) {
	file := benchCSV(b, 50000)
	dir := b.TempDir()
	st, _ := os.Stat(file)
	b.SetBytes(st.Size())
	for i := 0; b.Loop(); i++ {
		if _, err := loadInto(b, filepath.Join(dir, fmt.Sprintf("b%d.db", i)), []Input{{Name: file}}, Options{Table: "t"}); err != nil {
			b.Fatal(err)
		}
	}
	b.ReportMetric(float64(50000*b.N)/b.Elapsed().Seconds(), "rows/s")
}

// BenchmarkReadCSV and BenchmarkReadCSV_EncodingCSV compare this package's reader with the
// standard library's on the same bytes (the ratio of their ns/op is the figure of merit).
func BenchmarkReadCSV(b *testing.B) {
	data, _ := os.ReadFile(benchCSV(b, 50000))
	b.SetBytes(int64(len(data)))
	for b.Loop() {
		cr := newCSVReader(bytes.NewReader(data), ',', true)
		for {
			ok, err := cr.next()
			if err != nil {
				b.Fatal(err)
			}
			if !ok {
				break
			}
		}
	}
}

func BenchmarkReadCSV_EncodingCSV(b *testing.B) {
	data, _ := os.ReadFile(benchCSV(b, 50000))
	b.SetBytes(int64(len(data)))
	for b.Loop() {
		cr := csvNewReader(bytes.NewReader(data))
		for {
			if _, err := cr.Read(); err != nil {
				break
			}
		}
	}
}

// --replace refuses a table that splits were made of (their rows would no longer exist).
func TestLoad_ReplaceRefusesSplitTable(t *testing.T) {
	path := filepath.Join(t.TempDir(), "t.db")
	if _, err := loadInto(t, path, []Input{csvIn("a.csv", "n\n1\n2\n")}, Options{Table: "t"}); err != nil {
		t.Fatal(err)
	}
	err := store.Update(context.Background(), path, store.Options{}, false, store.Run{Command: "test"}, func(ctx context.Context, tx *store.Tx) error {
		_, err := tx.Conn.ExecContext(ctx, `INSERT INTO ss_splits(split_name, table_name, strategy, spec_json, seed, run_id, table_rows, assigned_rows, dropped_rows, table_seal, summary_json)
			VALUES ('naive', 't', 'random', '{}', 1, ?, 2, 2, 0, 'x', '{}')`, tx.RunID)
		return err
	})
	if err != nil {
		t.Fatal(err)
	}
	_, err = loadInto(t, path, []Input{csvIn("b.csv", "n\n3\n")}, Options{Table: "t", Replace: true})
	var u *UsageError
	if !errors.As(err, &u) || !strings.Contains(err.Error(), `table "t" has splits (naive)`) {
		t.Errorf("err = %v", err)
	}
}

// Many batches over several inputs, with bad rows between them: rows keep their input and
// line, ss_row runs 1..n without gaps, and every digest recomputes in SQL.
func TestLoad_ManyBatchesAcrossInputs(t *testing.T) {
	var inputs []Input
	wantLines := map[string][]int64{}
	for k, name := range []string{"a.csv", "b.csv", "c.csv"} {
		var b strings.Builder
		b.WriteString("id,x,when\n")
		for i := 1; i <= 300+k; i++ {
			line := int64(i + 1)
			if i%37 == 0 {
				b.WriteString("bad row\n")
				continue
			}
			fmt.Fprintf(&b, "%d,%d.25,2024-01-%02dT00:00:00Z\n", i, i, 1+i%28)
			wantLines[name] = append(wantLines[name], line)
		}
		inputs = append(inputs, csvIn(name, b.String()))
	}
	path := filepath.Join(t.TempDir(), "t.db")
	res, err := loadInto(t, path, inputs, Options{Table: "t", OnError: "quarantine", BatchRows: 7})
	if err != nil {
		t.Fatal(err)
	}
	total := int64(len(wantLines["a.csv"]) + len(wantLines["b.csv"]) + len(wantLines["c.csv"]))
	if res.Rows != total || res.Rejected != 24 {
		t.Fatalf("rows %d rejected %d, want %d and 24", res.Rows, res.Rejected, total)
	}
	db := openDB(t, path)
	got := map[string][]int64{}
	var prev int64
	for _, r := range query(t, db.DB, `SELECT ss_row, ss_source, ss_line FROM t ORDER BY ss_row`) {
		if r[0].(int64) != prev+1 {
			t.Fatalf("ss_row %d after %d", r[0], prev)
		}
		prev = r[0].(int64)
		got[r[1].(string)] = append(got[r[1].(string)], r[2].(int64))
	}
	if !reflect.DeepEqual(got, wantLines) {
		t.Errorf("lines per source differ")
	}
	if bad := query(t, db.DB, res.DigestCheckSQL); len(bad) != 0 {
		t.Errorf("digest check returned %d rows", len(bad))
	}
	if n := query(t, db.DB, `SELECT count(*) FROM ss_rejects`)[0][0]; n != int64(24) {
		t.Errorf("ss_rejects has %v rows", n)
	}
}

// A cancelled load (Ctrl-C) returns the context's error and writes nothing.
func TestLoad_Cancelled(t *testing.T) {
	file := benchCSV(t, 60000) // over 4 MiB, so pass 2 reports progress before its end
	path := filepath.Join(t.TempDir(), "t.db")
	ctx, cancel := context.WithCancel(context.Background())
	defer cancel()
	var inPass2 bool
	err := store.Update(ctx, path, store.Options{SQL: []sqlfn.Set{SQL()}}, true, store.Run{Command: "ingest"},
		func(ctx context.Context, tx *store.Tx) error {
			_, err := Load(ctx, tx.Conn, []Input{{Name: file}}, Options{Table: "t", RunID: tx.RunID,
				Progress: func(done, total int64) {
					if done > total/2 && done < total {
						inPass2 = true
						cancel()
					}
				}})
			return err
		})
	if !inPass2 {
		t.Fatal("progress never reported during pass 2")
	}
	if !errors.Is(err, context.Canceled) {
		t.Errorf("err = %v, want context.Canceled", err)
	}
	if _, serr := os.Stat(path); serr == nil {
		t.Errorf("a cancelled load created %s", path)
	}
}

func TestLoad_JSONLBlankAndCRLFLines(t *testing.T) {
	path := filepath.Join(t.TempDir(), "t.db")
	in := "  \r\n{\"a\": 1}\r\n\t\r\n{\"a\": 2}\r\n"
	res, err := loadInto(t, path, []Input{{Name: "x.jsonl", Reader: strings.NewReader(in)}}, Options{})
	if err != nil {
		t.Fatal(err)
	}
	got := query(t, openDB(t, path).DB, `SELECT ss_line, a FROM x ORDER BY ss_row`)
	if res.Rows != 2 || !reflect.DeepEqual(got, [][]any{{int64(2), int64(1)}, {int64(4), int64(2)}}) {
		t.Errorf("got %v", got)
	}
}

// REAL values whose digests take the input-text shortcut (and some that cannot) recompute
// identically in SQL from the stored values.
func TestLoad_RealDigestShortcut(t *testing.T) {
	path := filepath.Join(t.TempDir(), "t.db")
	in := "x,n\n200.000,1\n1.50,2\n-0.000,3\n0.0001,4\n1234567.5,5\n1e-7,6\n0.1,7\n123456.000,8\n0.30000000000000004,9\n-12,10\n"
	res, err := loadInto(t, path, []Input{csvIn("r.csv", in)}, Options{})
	if err != nil {
		t.Fatal(err)
	}
	if res.Columns[0].Type != TypeReal {
		t.Fatalf("x is %v", res.Columns[0].Type)
	}
	db := openDB(t, path)
	if bad := query(t, db.DB, res.DigestCheckSQL); len(bad) != 0 {
		t.Errorf("rows whose digest does not recompute: %v", bad)
	}
	for _, r := range query(t, db.DB, `SELECT ss_digest, x, n FROM r`) {
		if want, _ := Digest(r[1], r[2]); r[0] != want {
			t.Errorf("x=%v: ss_digest %v, Go %d", r[1], r[0], want)
		}
	}
}

// The one-pass load fixes provisional types from a prefix and restarts in two passes when a
// later value contradicts them. With a one-record prefix nearly every test input restarts;
// the results must be those of the two-pass load.
func TestLoad_WithRestarts(t *testing.T) {
	old := prefixRecords
	prefixRecords = 1
	defer func() { prefixRecords = old }()
	for name, f := range map[string]func(*testing.T){
		"types":        TestLoad_TypesValuesAndSystemColumns,
		"digest":       TestLoad_DigestGoEqualsSQL,
		"several":      TestLoad_SeveralInputsOneTable,
		"append":       TestLoad_AppendReplaceRefuse,
		"jsonl":        TestLoad_JSONL,
		"onerror":      TestLoad_OnError,
		"header":       TestLoad_HeaderProblems,
		"batches":      TestLoad_ManyBatchesAcrossInputs,
		"real digests": TestLoad_RealDigestShortcut,
		"norm digests": TestLoad_NormDigestMatchesSQLite,
		"norm append":  TestLoad_AppendToTableWithoutNormDigest,
	} {
		t.Run(name, f)
	}
}

func TestLoad_RestartAfterContradiction(t *testing.T) {
	old := prefixRecords
	prefixRecords = 2
	defer func() { prefixRecords = old }()
	path := filepath.Join(t.TempDir(), "t.db")
	// Rows 2–3 say INTEGER; row 5 says it is text; row 4 is bad and quarantined.
	in := "n,m\n1,1.5\n2,2\n3\n4,x\n5,calm\n"
	res, err := loadInto(t, path, []Input{csvIn("a.csv", in), csvIn("b.csv", "n,m\n6,7\n")}, Options{Table: "t", OnError: "quarantine"})
	if err != nil {
		t.Fatal(err)
	}
	if res.Rows != 5 || res.Rejected != 1 || res.Columns[0].Type != TypeInteger || res.Columns[1].Type != TypeText {
		t.Fatalf("result %+v", res)
	}
	if res.Passes != 2 {
		t.Errorf("passes = %d, want 2 (a restart)", res.Passes)
	}
	if want := `"x" (a.csv:5) does not parse as REAL like the values before it`; res.Columns[1].Reason != want {
		t.Errorf("reason %q, want %q", res.Columns[1].Reason, want)
	}
	db := openDB(t, path)
	got := query(t, db.DB, `SELECT ss_row, ss_source, ss_line, n, m FROM t ORDER BY ss_row`)
	want := [][]any{{int64(1), "a.csv", int64(2), int64(1), "1.5"}, {int64(2), "a.csv", int64(3), int64(2), "2"},
		{int64(3), "a.csv", int64(5), int64(4), "x"}, {int64(4), "a.csv", int64(6), int64(5), "calm"}, {int64(5), "b.csv", int64(2), int64(6), "7"}}
	if !reflect.DeepEqual(got, want) {
		t.Errorf("rows\n got %v\nwant %v", got, want)
	}
	if n := query(t, db.DB, `SELECT count(*) FROM ss_rejects`)[0][0]; n != int64(1) {
		t.Errorf("ss_rejects has %v rows, want 1", n)
	}
	if bad := query(t, db.DB, res.DigestCheckSQL); len(bad) != 0 {
		t.Errorf("digest check: %v", bad)
	}
	src := query(t, db.DB, `SELECT path, size, rows_loaded, rows_rejected FROM ss_sources ORDER BY source_id`)
	if !reflect.DeepEqual(src, [][]any{{"a.csv", int64(len(in)), int64(4), int64(1)}, {"b.csv", int64(8), int64(1), int64(0)}}) {
		t.Errorf("ss_sources %v", src)
	}
	// A --replace that restarts keeps its meaning.
	res, err = loadInto(t, path, []Input{csvIn("c.csv", "n\n1\n2\nz\n")}, Options{Table: "t", Replace: true})
	if err != nil {
		t.Fatal(err)
	}
	if res.Mode != "replace" || res.Rows != 3 || res.Columns[0].Type != TypeText {
		t.Errorf("replace result %+v", res)
	}
}
