package main

import (
	"strings"
	"testing"

	"splitsmith/splits"
)

func TestFractionWarnings(t *testing.T) {
	f := func(x float64) *float64 { return &x }
	mk := func(assigned int, holdout float64, span string, spanDropped int) *splits.Result {
		return &splits.Result{
			Spec:     &splits.Spec{Span: span},
			Assigned: assigned,
			Dropped:  map[string]int{"span": spanDropped},
			Sides: []splits.SideSummary{
				{Side: "train", TargetFraction: f(0.8), RowFraction: 1 - holdout},
				{Side: "holdout", TargetFraction: f(0.2), RowFraction: holdout},
			},
		}
	}
	tests := []struct {
		name string
		r    *splits.Result
		want []string // substrings of the single warning; nil = no warning
	}{
		{"on target", mk(1000, 0.19, "drop", 0), nil},
		{"small split is coarse", mk(40, 0.02, "drop", 10), nil},
		{"starved by span drop", mk(2487, 0.0197, "drop", 10576), []string{"side holdout holds 2.0%", "target of 20%", "10576 rows", "--span entity"}},
		{"starved, other cause", mk(2487, 0.05, "entity", 0), []string{"side holdout holds 5.0%"}},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			got := fractionWarnings(tt.r)
			if tt.want == nil {
				if len(got) != 0 {
					t.Fatalf("want no warning, got %q", got)
				}
				return
			}
			if len(got) != 1 {
				t.Fatalf("want one warning, got %q", got)
			}
			for _, w := range tt.want {
				if !strings.Contains(got[0], w) {
					t.Errorf("warning %q lacks %q", got[0], w)
				}
			}
			if tt.r.Spec.Span != "drop" && strings.Contains(got[0], "--span drop") {
				t.Errorf("span hint given for span %q: %q", tt.r.Spec.Span, got[0])
			}
		})
	}
}
