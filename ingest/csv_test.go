package ingest

import (
	"bytes"
	"encoding/csv"
	"io"
	"reflect"
	"strings"
	"testing"
	"testing/iotest"
)

type parsed struct {
	line    int64
	fields  []string
	problem string
}

func readAll(t testing.TB, r io.Reader, comma byte, quoted bool) ([]parsed, error) {
	t.Helper()
	cr := newCSVReader(r, comma, quoted)
	var out []parsed
	for {
		ok, err := cr.next()
		if err != nil {
			return out, err
		}
		if !ok {
			return out, nil
		}
		rec := cr.rec()
		p := parsed{line: rec.line, problem: rec.problem}
		for _, f := range rec.fields {
			p.fields = append(p.fields, string(f))
		}
		out = append(out, p)
	}
}

// The examples of RFC 4180 section 2 ("Definition of the CSV Format"), items 1–7, as printed
// in the RFC (CRLF written out), and the records the RFC says they hold. Checked against the
// RFC's section 2 text as quoted from rfc4180.txt in two Debian source packages (miller
// 5.6.2, c/csv-rfc.txt; bobcat 5.07.00, csv4180/README). Two cases marked "rule" apply the
// RFC's wording (spaces are part of a field; commas in quoted fields) to inputs of our own.
func TestCSV_RFC4180Examples(t *testing.T) {
	tests := []struct {
		name string
		in   string
		want [][]string
	}{
		{"§2.1 records delimited by CRLF", "aaa,bbb,ccc\r\nzzz,yyy,xxx\r\n", [][]string{{"aaa", "bbb", "ccc"}, {"zzz", "yyy", "xxx"}}},
		{"§2.2 last record without line break", "aaa,bbb,ccc\r\nzzz,yyy,xxx", [][]string{{"aaa", "bbb", "ccc"}, {"zzz", "yyy", "xxx"}}},
		{"§2.3 header line", "field_name,field_name,field_name\r\naaa,bbb,ccc\r\nzzz,yyy,xxx\r\n", [][]string{{"field_name", "field_name", "field_name"}, {"aaa", "bbb", "ccc"}, {"zzz", "yyy", "xxx"}}},
		{"§2.4 spaces are part of a field, no trailing comma", "aaa,bbb,ccc", [][]string{{"aaa", "bbb", "ccc"}}},
		{"§2.4 rule: spaces kept", " aaa , bbb ,ccc ", [][]string{{" aaa ", " bbb ", "ccc "}}},
		{"§2.5 quoted fields", "\"aaa\",\"bbb\",\"ccc\"\r\nzzz,yyy,xxx", [][]string{{"aaa", "bbb", "ccc"}, {"zzz", "yyy", "xxx"}}},
		{"§2.6 line breaks, quotes and commas in quoted fields", "\"aaa\",\"b\r\nbb\",\"ccc\"\r\nzzz,yyy,xxx", [][]string{{"aaa", "b\r\nbb", "ccc"}, {"zzz", "yyy", "xxx"}}},
		{"§2.6 rule: comma in a quoted field", "\"a,a\",b\r\n", [][]string{{"a,a", "b"}}},
		{"§2.7 doubled quote", "\"aaa\",\"b\"\"bb\",\"ccc\"", [][]string{{"aaa", "b\"bb", "ccc"}}},
		// Beyond the RFC (common practice, no source): LF endings, a UTF-8 BOM, empty fields.
		{"LF endings", "a,b\nc,d\n", [][]string{{"a", "b"}, {"c", "d"}}},
		{"BOM dropped", "\xef\xbb\xbfa,b\r\n", [][]string{{"a", "b"}}},
		{"empty fields", ",,\n\"\",x,\n", [][]string{{"", "", ""}, {"", "x", ""}}},
		{"blank lines skipped", "a\n\n\r\nb\n", [][]string{{"a"}, {"b"}}},
	}
	for _, tt := range tests {
		for _, size := range []int{1 << 20, 1, 3} {
			t.Run(tt.name, func(t *testing.T) {
				old := csvBufSize
				csvBufSize = size
				defer func() { csvBufSize = old }()
				got, err := readAll(t, iotest.OneByteReader(strings.NewReader(tt.in)), ',', true)
				if err != nil {
					t.Fatal(err)
				}
				var fields [][]string
				for _, p := range got {
					if p.problem != "" {
						t.Fatalf("line %d: unexpected problem %s", p.line, p.problem)
					}
					fields = append(fields, p.fields)
				}
				if !reflect.DeepEqual(fields, tt.want) {
					t.Errorf("got %q, want %q", fields, tt.want)
				}
			})
		}
	}
}

func TestCSV_LineNumbers(t *testing.T) {
	in := "h1,h2\n1,\"two\nlines\"\n\n3,x\r\n4,\"a\r\nb\r\nc\"\n5,y"
	got, err := readAll(t, strings.NewReader(in), ',', true)
	if err != nil {
		t.Fatal(err)
	}
	var lines []int64
	for _, p := range got {
		lines = append(lines, p.line)
	}
	if want := []int64{1, 2, 5, 6, 9}; !reflect.DeepEqual(lines, want) {
		t.Errorf("lines = %v, want %v", lines, want)
	}
}

func TestCSV_BadQuoting(t *testing.T) {
	tests := []struct {
		name, in, problem string
		line              int64
	}{
		{"quote in unquoted field", "a,b\n1,x\"y\n", "bad quoting: quote inside unquoted field 2", 2},
		{"text after closing quote", "a,b\n\"x\"y,2\n", `bad quoting: unexpected 'y' after the closing quote of field 1`, 2},
		{"never closed", "a,b\n1,\"open\n2,3\n", "bad quoting: quoted field 2 is never closed", 2},
		{"invalid UTF-8", "a,b\n1,caf\xe9\n", "invalid UTF-8 at byte 4", 2},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			got, err := readAll(t, strings.NewReader(tt.in), ',', true)
			if err != nil {
				t.Fatal(err)
			}
			var found bool
			for _, p := range got {
				if p.problem != "" {
					found = true
					if p.problem != tt.problem || p.line != tt.line {
						t.Errorf("line %d: %q, want line %d: %q", p.line, p.problem, tt.line, tt.problem)
					}
				}
			}
			if !found {
				t.Errorf("no problem reported, want %q", tt.problem)
			}
		})
	}
}

// A record after a bad one is read normally (the reader resynchronises at the line end).
func TestCSV_ResyncAfterBadQuote(t *testing.T) {
	got, _ := readAll(t, strings.NewReader("a,b\n1,x\"y\n2,z\n"), ',', true)
	if len(got) != 3 || got[2].problem != "" || !reflect.DeepEqual(got[2].fields, []string{"2", "z"}) || got[2].line != 3 {
		t.Errorf("got %+v", got)
	}
}

func TestTSV_NoQuoting(t *testing.T) {
	got, err := readAll(t, strings.NewReader("a\tb\r\n\"x\"\ty z\n"), '\t', false)
	if err != nil {
		t.Fatal(err)
	}
	want := []parsed{{line: 1, fields: []string{"a", "b"}}, {line: 2, fields: []string{`"x"`, "y z"}}}
	if !reflect.DeepEqual(got, want) {
		t.Errorf("got %+v, want %+v", got, want)
	}
}

// FuzzCSV checks the reader never fails or panics on any input, and that where Go's
// encoding/csv (a general-purpose RFC 4180 reader) accepts an input without carriage returns
// (it rewrites CRLF inside quoted fields, which RFC 4180 keeps), both read the same records.
func FuzzCSV(f *testing.F) {
	for _, s := range []string{"aaa,bbb,ccc\r\nzzz,yyy,xxx\r\n", "\"aaa\",\"b\"\"bb\",\"ccc\"", "\"a\nb\",c\n", "a,\"b", "x\"y,z", "\xef\xbb\xbfh\n1\n", "", ",\n,,\n", "\"\"\"\"\n"} {
		f.Add(s)
	}
	f.Fuzz(func(t *testing.T, in string) {
		old := csvBufSize
		csvBufSize = 4
		defer func() { csvBufSize = old }()
		got, err := readAll(t, strings.NewReader(in), ',', true)
		if err != nil {
			t.Fatalf("reader error on %q: %v", in, err)
		}
		if strings.ContainsAny(in, "\r") || strings.HasPrefix(in, "\xef\xbb\xbf") {
			return
		}
		cr := csv.NewReader(strings.NewReader(in))
		cr.FieldsPerRecord = -1
		want, werr := cr.ReadAll()
		if werr != nil {
			return
		}
		var fields [][]string
		for _, p := range got {
			if p.problem != "" {
				if strings.HasPrefix(p.problem, "invalid UTF-8") {
					return
				}
				t.Fatalf("problem %q on %q, which encoding/csv reads as %q", p.problem, in, want)
			}
			fields = append(fields, p.fields)
		}
		if len(fields) != len(want) {
			t.Fatalf("%q: %d records, encoding/csv %d: %q vs %q", in, len(fields), len(want), fields, want)
		}
		for i := range want {
			if !reflect.DeepEqual(fields[i], want[i]) {
				t.Fatalf("%q record %d: %q, encoding/csv %q", in, i, fields[i], want[i])
			}
		}
	})
}

// FuzzJSONL checks the JSON Lines reader never fails or panics, and that every record it
// reads has one field per column.
func FuzzJSONL(f *testing.F) {
	for _, s := range []string{"{\"a\":1,\"b\":\"x\"}\n{\"a\":2}\n", "{\"a\":[1,2],\"b\":{\"c\":null}}\n", "[1]\n", "{\"a\":1}\n{\"z\":1}\n", "{\"a\":1,\"a\":2}\n", "{}\n", "{\"a\":\"\xff\"}\n"} {
		f.Add(s)
	}
	f.Fuzz(func(t *testing.T, in string) {
		jr := newJSONLReader(bytes.NewReader([]byte(in)))
		cols, _, err := jr.header()
		if err != nil {
			return
		}
		for {
			ok, err := jr.next()
			if err != nil {
				t.Fatalf("reader error on %q: %v", in, err)
			}
			if !ok {
				return
			}
			r := jr.rec()
			if r.problem == "" && len(r.fields) != len(cols) {
				t.Fatalf("%q: record with %d fields, %d columns", in, len(r.fields), len(cols))
			}
		}
	})
}

func csvNewReader(r io.Reader) *csv.Reader {
	cr := csv.NewReader(r)
	cr.ReuseRecord = true
	cr.FieldsPerRecord = -1
	return cr
}
