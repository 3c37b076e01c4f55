package splits

import (
	"errors"
	"strings"
	"testing"
)

func TestParseSpec_FileEqualsFlags(t *testing.T) {
	file := `version: 1
name: sound
table: pipes
seed: 7
sides: train=0.7,holdout=0.3
group: [segment_id]
time: inspection_date
until: 2026-12-31
gap: 90d
span: entity
`
	listForm := strings.Replace(file, "sides: train=0.7,holdout=0.3", "sides:\n  - {name: train, fraction: 0.7}\n  - {name: holdout, fraction: 0.3}", 1)
	flags := &Spec{Name: "sound", Table: "pipes", Seed: 7, Sides: Sides{{"train", 0.7}, {"holdout", 0.3}}, Group: []string{"segment_id"}, Time: "inspection_date", Until: "2026-12-31", Gap: "90d", Span: "entity"}
	if err := flags.Resolve(); err != nil {
		t.Fatal(err)
	}
	for _, f := range []string{file, listForm} {
		s, err := ParseSpec([]byte(f), "split.yaml")
		if err != nil {
			t.Fatal(err)
		}
		if err := s.Resolve(); err != nil {
			t.Fatal(err)
		}
		if s.CanonicalJSON() != flags.CanonicalJSON() {
			t.Errorf("file and flags differ:\n%s\n%s", s.CanonicalJSON(), flags.CanonicalJSON())
		}
	}
	// Without seed, a file means what the flags mean (--seed defaults to 1).
	if s, err := ParseSpec([]byte("version: 1\nname: a\ntable: t\n"), "s.yaml"); err != nil || s.Seed != 1 {
		t.Errorf("default seed: %v %v", s, err)
	}
	// JSON is YAML.
	s, err := ParseSpec([]byte(flags.CanonicalJSON()), "split.json")
	if err != nil {
		t.Fatal(err)
	}
	s.Resolve()
	if s.CanonicalJSON() != flags.CanonicalJSON() {
		t.Errorf("canonical JSON does not round-trip")
	}
}

func TestSpec_Errors(t *testing.T) {
	tests := []struct {
		name, file, want string
	}{
		{"version", "version: 2\nname: a\ntable: t\n", "split.yaml: version: must be 1 (got 2)"},
		{"unknown field", "version: 1\nname: a\ntable: t\nlable: x\n", "field lable not found"},
		{"sum", "version: 1\nname: a\ntable: t\nsides: train=0.7,holdout=0.2\n", "split.yaml: sides: fractions must sum to 1, got 0.9"},
		{"repeated side", "version: 1\nname: a\ntable: t\nsides: [{name: a, fraction: 0.5}, {name: a, fraction: 0.5}]\n", `split.yaml: sides[2].name: side "a" is repeated`},
		{"bad fraction", "version: 1\nname: a\ntable: t\nsides: [{name: a, fraction: 0}, {name: b, fraction: 1}]\n", "split.yaml: sides[1].fraction: fraction of side \"a\" must be in (0, 1]"},
		{"group repeated", "version: 1\nname: a\ntable: t\ngroup: [g, g]\n", `split.yaml: group[2]: column "g" is repeated`},
		{"gap", "version: 1\nname: a\ntable: t\ntime: d\ngap: soon\n", `split.yaml: gap: gap "soon": want a duration`},
		{"gap without time", "version: 1\nname: a\ntable: t\ngap: 3d\n", "split.yaml: gap: needs --time"},
		{"reserved name", "version: 1\nname: ss_x\ntable: t\n", "split.yaml: name: split name \"ss_x\" is reserved"},
		{"folds", "version: 1\nname: a\ntable: t\nfolds: 1\n", "split.yaml: folds: must be 2 or more"},
		{"span policy", "version: 1\nname: a\ntable: t\ntime: d\ngroup: [g]\nspan: both\n", `split.yaml: span: "both" is not one of drop, earlier, entity`},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			s, err := ParseSpec([]byte(tt.file), "split.yaml")
			if err == nil {
				err = s.Resolve()
				var fe *FieldError
				if errors.As(err, &fe) {
					fe.File = "split.yaml"
				}
			}
			if err == nil || !strings.Contains(err.Error(), tt.want) {
				t.Errorf("err = %v, want %q", err, tt.want)
			}
		})
	}
	// From flags the field is named by its flag.
	s := &Spec{Name: "a", Table: "t", Sides: Sides{{"train", 0.5}, {"train", 0.5}}}
	if err := s.Resolve(); err == nil || err.Error() != `--sides: side "train" is repeated (sides 1 and 2)` {
		t.Errorf("flag error = %v", err)
	}
}

func TestParseGap(t *testing.T) {
	for _, tt := range []struct {
		in   string
		want float64
	}{{"30d", 30 * 86400}, {"12h", 43200}, {"1w2d", 9 * 86400}, {"90m", 5400}, {"1.5h", 5400}} {
		if got, err := ParseGap(tt.in, false); err != nil || got != tt.want {
			t.Errorf("ParseGap(%q) = %v, %v", tt.in, got, err)
		}
	}
}
