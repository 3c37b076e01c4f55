package ingest

import (
	"math"
	"strconv"
	"strings"
	"testing"
)

// The inference rules of the package doc, value by value. Expected types follow the documented
// rules (this project's policy, not an outside standard); the date and time forms are those of
// RFC 3339 §5.6 and ISO 8601's extended format.
func TestInferValue(t *testing.T) {
	tests := []struct {
		in   string
		want Type
	}{
		{"0", TypeInteger}, {"42", TypeInteger}, {"-7", TypeInteger},
		{"9223372036854775807", TypeInteger},   // max int64
		{"-9223372036854775808", TypeInteger},  // min int64
		{"9223372036854775808", TypeText},      // overflows: kept exact as TEXT
		{"00123", TypeText}, {"007", TypeText}, // leading-zero codes
		{"+5", TypeText}, {"1,5", TypeText}, {"1 000", TypeText}, {" 42", TypeText}, {"42 ", TypeText},
		{"1.5", TypeReal}, {"-0.25", TypeReal}, {"0.5", TypeReal}, {".5", TypeReal}, {"2e-3", TypeReal}, {"1.5E+10", TypeReal},
		{"5.", TypeText}, {"01.5", TypeText}, {"1e999", TypeText}, {"inf", TypeText}, {"Infinity", TypeText}, {"0x10", TypeText}, {"e5", TypeText},
		{"true", TypeBoolean}, {"FALSE", TypeBoolean}, {"True", TypeBoolean},
		{"yes", TypeText}, {"t", TypeText}, // never guessed
		{"2024-03-01", TypeDate}, {"2024-02-29", TypeDate}, {"2000-02-29", TypeDate},
		{"2023-02-29", TypeText}, {"1900-02-29", TypeText}, {"2024-13-01", TypeText}, {"2024-04-31", TypeText}, {"2024-3-1", TypeText},
		{"2024-03-01T08:15:00Z", TypeTimestamp},          // RFC 3339 §5.8 style
		{"2024-03-01T08:15:00.123+02:00", TypeTimestamp}, // with fraction and offset
		{"2024-03-01 08:15:00", TypeTimestamp}, {"2024-03-01T08:15", TypeTimestamp}, {"2024-03-01T08:15:00-0500", TypeTimestamp},
		{"2024-03-01T24:00:00", TypeText}, {"2024-03-01T08:60", TypeText}, {"2024-03-01T08:15:00+25:00", TypeText}, {"2024-03-01T08:15:00 Z", TypeText},
		{"calm", TypeText}, {"81F", TypeText}, {"S-1", TypeText},
	}
	for _, tt := range tests {
		got, ok := InferValue(tt.in, nil)
		if !ok || got != tt.want {
			t.Errorf("InferValue(%q) = %v, %v; want %v", tt.in, got, ok, tt.want)
		}
	}
	for _, m := range []string{"", "NA", "N/A", "null", "NaN"} {
		if _, ok := InferValue(m, nil); ok {
			t.Errorf("InferValue(%q) not missing", m)
		}
	}
	if _, ok := InferValue("NA", []string{}); !ok {
		t.Errorf("with no missing tokens, NA is a value")
	}
}

func TestCanonTimestamp(t *testing.T) {
	tests := []struct{ in, want string }{
		{"2024-03-01 08:15", "2024-03-01T08:15:00"},
		{"2024-03-01t08:15:07z", "2024-03-01T08:15:07Z"},
		{"2024-03-01T08:15:07.250-0500", "2024-03-01T08:15:07.250-05:00"},
		{"2024-03-01T08:15:07+02:00", "2024-03-01T08:15:07+02:00"},
	}
	for _, tt := range tests {
		got, ok, _ := canonTimestamp([]byte(tt.in), nil)
		if !ok || string(got) != tt.want {
			t.Errorf("canonTimestamp(%q) = %q, %v; want %q", tt.in, got, ok, tt.want)
		}
	}
}

func TestColStat_Decide(t *testing.T) {
	col := func(vals ...string) (Type, string) {
		c := colStat{mask: mAll}
		for i, v := range vals {
			c.observe([]byte(v), "f.csv", int64(i+2))
		}
		return c.decide()
	}
	tests := []struct {
		vals   []string
		want   Type
		reason string
	}{
		{[]string{"1", "2", "3"}, TypeInteger, "all 3 non-missing values parse as INTEGER"},
		{[]string{"1", "2.5"}, TypeReal, "all 2 non-missing values parse as REAL"},
		{[]string{"1", "2", "calm"}, TypeText, `"calm" (f.csv:4) does not parse as INTEGER or REAL like the values before it`},
		{[]string{"00123", "1"}, TypeText, `first value "00123" (f.csv:2) has a leading zero (kept as a code)`},
		{[]string{"2024-01-01", "2024-01-01T00:00:00"}, TypeText, `"2024-01-01T00:00:00" (f.csv:3) does not parse as DATE like the values before it`},
		{[]string{"2024-01-01T00:00:00Z", "2024-01-01T00:00:00"}, TypeText, `timestamps with and without a zone are mixed (first at f.csv:3 "2024-01-01T00:00:00")`},
		{[]string{"0", "1", "1"}, TypeInteger, "all 3 non-missing values parse as INTEGER"}, // never BOOLEAN
	}
	for _, tt := range tests {
		got, reason := col(tt.vals...)
		if got != tt.want || reason != tt.reason {
			t.Errorf("%q: %v %q; want %v %q", tt.vals, got, reason, tt.want, tt.reason)
		}
	}
}

// The digest hashes a REAL's input text when it already is Go's shortest 'g' form; the
// expected answers are strconv.FormatFloat's own (checked in the loop).
func TestRealTextCanonical(t *testing.T) {
	for _, s := range []string{"0", "-0", "1.5", "0.1", "0.0001", "123456", "123456.789012345", "-0.25", "2", "100000",
		"0.00001", "1000000", "1.50", "01.5", ".5", "1e5", "1234567890.123456", "0.30000000000000004"} {
		want := false
		if x, err := strconv.ParseFloat(s, 64); err == nil {
			want = strconv.FormatFloat(x, 'g', -1, 64) == s && s != "-0" // -0 is stored as 0
		}
		got := realTextCanonical([]byte(s))
		if got && !want {
			t.Errorf("realTextCanonical(%q) = true, but FormatFloat differs", s)
		}
		if !got && want && len(s) < 16 {
			t.Errorf("realTextCanonical(%q) = false for a canonical short value", s)
		}
	}
}

func TestNormalizeText(t *testing.T) {
	// Only ASCII letters are lower-cased, as SQLite's built-in lower() does (its documentation:
	// "works for ASCII characters only"), so stock SQL reproduces the normalisation.
	tests := []struct{ in, want string }{
		{"  Cast  IRON ", "cast iron"},
		{"a\t\nb", "a b"},
		{"ÉCLAT Río", "Éclat río"},
		{"", ""},
		{"   ", ""},
	}
	for _, tt := range tests {
		if got := NormalizeText(tt.in); got != tt.want {
			t.Errorf("NormalizeText(%q) = %q, want %q", tt.in, got, tt.want)
		}
	}
}

// FuzzInfer checks that whatever type a value is given, the converter accepts it as that
// type (pass 2 never meets a value that pass 1 typed but cannot store), and that the stored
// form of an inferred number reads back as the same type.
func FuzzInfer(f *testing.F) {
	for _, s := range []string{"42", "00123", "1.5", "-0", "0.0001", "0.1", "123456789012345", "9007199254740993", "1.00000000000001", ".5", "5.", "200.000", "1.50", "-0.000", "0.0", "100.0", "123456.5", "2024-02-29", "2024-03-01 08:15", "true", "9223372036854775808", "1e999", ".5", "NaN"} {
		f.Add(s)
	}
	f.Fuzz(func(t *testing.T, s string) {
		typ, ok := InferValue(s, nil)
		if !ok {
			return
		}
		c := &converter{}
		v, ok := c.value(typ, false, []byte(s))
		if !ok {
			t.Fatalf("%q inferred %v but does not convert", s, typ)
		}
		if typ == TypeTimestamp {
			if again, _ := InferValue(v.(string), nil); again != TypeTimestamp {
				t.Fatalf("%q: canonical form %q is %v", s, v, again)
			}
		}
		if f, ok := parseFloatFast([]byte(s)); ok {
			want, err := strconv.ParseFloat(s, 64)
			if err != nil || math.Float64bits(f) != math.Float64bits(want) {
				t.Fatalf("parseFloatFast(%q) = %v, strconv.ParseFloat %v (%v)", s, f, want, err)
			}
		}
		// The digest takes this shortcut only for text that parsed as a REAL.
		if x, err := strconv.ParseFloat(s, 64); err == nil && realTextCanonical(trimFraction([]byte(s))) {
			tr := trimFraction([]byte(s))
			if strconv.FormatFloat(x, 'g', -1, 64) != string(tr) {
				t.Fatalf("%q trimmed to %q taken as canonical REAL text, but FormatFloat gives %q", s, tr, strconv.FormatFloat(x, 'g', -1, 64))
			}
		}
		if _, ok := c.value(typ, true, []byte(s)); !ok {
			t.Fatalf("%q: lenient parse of %v rejects it", s, typ)
		}
	})
}

// parseFloatFast agrees bit for bit with strconv.ParseFloat wherever it answers.
func TestParseFloatFast(t *testing.T) {
	for _, s := range []string{"0", "-0", "1.5", "0.1", "0.3", "123456.789", "999999999999999", "0.000000000000001", "-12.5", ".5", "5.", "1.2.3", "", "-", "1e5", "1234567890123456"} {
		f, ok := parseFloatFast([]byte(s))
		want, err := strconv.ParseFloat(s, 64)
		if ok && (err != nil || math.Float64bits(f) != math.Float64bits(want)) {
			t.Errorf("parseFloatFast(%q) = %v, strconv.ParseFloat %v, %v", s, f, want, err)
		}
		if !ok && err == nil && len(s) <= 8 && !strings.ContainsAny(s, "e") {
			t.Errorf("parseFloatFast(%q) declined a short plain decimal", s)
		}
	}
}
