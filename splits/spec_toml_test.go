package splits

import (
	"strings"
	"testing"
)

// A TOML spec file means what the same YAML file means (TOML v1.0.0 syntax: tables, arrays
// of tables, a bare local date).
func TestParseSpec_TOMLEqualsYAML(t *testing.T) {
	toml := `version = 1
name = "sound"
table = "pipes"
seed = 7
group = ["segment_id"]
time = "inspection_date"
gap = "30d"
cutoff = 2023-01-01
until = 2026-12-31T23:59:00

[[sides]]
name = "train"
fraction = 0.8

[[sides]]
name = "holdout"
fraction = 0.2
`
	yaml := `version: 1
name: sound
table: pipes
seed: 7
group: [segment_id]
time: inspection_date
gap: 30d
cutoff: "2023-01-01"
until: "2026-12-31T23:59:00"
sides:
  - {name: train, fraction: 0.8}
  - {name: holdout, fraction: 0.2}
`
	a, err := ParseSpec([]byte(toml), "split.toml")
	if err != nil {
		t.Fatal(err)
	}
	b, err := ParseSpec([]byte(yaml), "split.yaml")
	if err != nil {
		t.Fatal(err)
	}
	for _, s := range []*Spec{a, b} {
		if err := s.Resolve(); err != nil {
			t.Fatal(err)
		}
	}
	if a.CanonicalJSON() != b.CanonicalJSON() {
		t.Errorf("TOML %s\nYAML %s", a.CanonicalJSON(), b.CanonicalJSON())
	}
	// The flag form of sides works too.
	c, err := ParseSpec([]byte("version = 1\nname = \"s\"\ntable = \"t\"\nsides = \"train=0.7,holdout=0.3\"\n"), "s.toml")
	if err != nil || len(c.Sides) != 2 || c.Sides[1].Fraction != 0.3 {
		t.Errorf("sides string: %+v %v", c, err)
	}
}

func TestParseSpec_TOMLBadInput(t *testing.T) {
	tests := []struct{ in, want string }{
		{"version = 1\nname = \"s\"\ntable = \"t\"\nsidez = \"train=1\"\n", `s.toml:4: unknown field "sidez" (fields: cutoff,`},
		{"version = 1\n[[sides]]\nname = \"train\"\nfrac = 1\n", `s.toml:4: sides[0]: unknown field "frac" (fields: name, fraction)`},
		{"version = 1\nname = \"s\n", "s.toml:2:"},
		{"", "s.toml: version: empty spec file"},
		{"version = 2\nname = \"s\"\n", "s.toml: version: must be 1 (got 2)"},
		{"version = 1\nseed = \"x\"\n", `s.toml:2: seed: wants an integer, got x`},
		{"version = 1\ngroup = \"segment\"\n", `s.toml:2: group: wants an array of strings, got segment`},
		{"version = 1\n[[sides]]\nname = \"train\"\nfraction = \"most\"\n", `s.toml:4: sides[0].fraction: wants a number, got most`},
	}
	for _, tt := range tests {
		_, err := ParseSpec([]byte(tt.in), "s.toml")
		if err == nil || !strings.Contains(err.Error(), tt.want) {
			t.Errorf("%q: err = %v, want %q", tt.in, err, tt.want)
		}
	}
}
