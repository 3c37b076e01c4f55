package leakage

import (
	"errors"
	"fmt"
	"math"
	"regexp"
	"sort"
	"strings"

	"splitsmith/ingest"
)

// Severity of a finding: info < warn < error.
type Severity string

const (
	Info  Severity = "info"
	Warn  Severity = "warn"
	Error Severity = "error"
)

// Rank orders severities (info 1, warn 2, error 3; anything else 0).
func (s Severity) Rank() int {
	switch s {
	case Info:
		return 1
	case Warn:
		return 2
	case Error:
		return 3
	}
	return 0
}

// Param is one configurable threshold of a check, set with --param CHECK.NAME=VALUE.
type Param struct {
	Name    string
	Default float64
	Doc     string // what it means, and where the default comes from
}

// Check is one audit check: a documented value in the catalog All().
type Check struct {
	Name     string   // lower_snake: the --checks value and ss_findings.check_name
	Title    string   // a short line
	Doc      string   // what it detects and why it matters
	Requires []string // options it needs: "label", "time", "text", "entity"
	Params   []Param
	SQL      string // "stock" (stored SQL uses stock SQLite only), "tool" (uses leak_* functions) or "none"
	run      func(a *audit) error
}

// Param returns the default of a named parameter (panics on a programmer error).
func (c *Check) param(name string) Param {
	for _, p := range c.Params {
		if p.Name == name {
			return p
		}
	}
	panic("leakage: check " + c.Name + " has no parameter " + name)
}

const exactDigits = ingest.NormDigits

// The catalog. Every user-visible check is one of these values.
var (
	ExactDuplicate = &Check{
		Name:  "exact_duplicate",
		Title: "identical feature values on two sides, or repeated within the holdout",
		Doc: "Rows whose feature columns (every user column except the label, entity columns, split keys and --ignore) " +
			"are equal after normalisation: text trimmed, runs of spaces, tabs and line breaks collapsed to one space, ASCII " +
			"letters lower-cased (as SQLite's lower()); REAL values rounded to `digits` significant digits; INTEGER values exact. " +
			"A row on both sides lets a model score its own training data (error). Copies within the holdout give those rows " +
			"extra weight in the holdout metric (warn); copies within a training or other side are listed for information.",
		Params: []Param{
			{"digits", exactDigits, "significant digits REAL values are rounded to before comparing (9: tolerance of about 1 part in 10^9)"},
			{"normalize", 1, "0: compare stored values as they are (REAL to 17 significant digits, text unchanged); when no column is excluded this groups the content digests stored at ingest (ss_digest), the fast path"},
		},
		SQL: "stock",
		run: runExactDuplicate,
	}
	NearDuplicateText = &Check{
		Name:     "near_duplicate_text",
		Title:    "near-copies of a text column across sides (MinHash + LSH, confirmed by exact Jaccard)",
		Doc:      "For each --text column, pairs of rows on different sides whose shingle sets (after lower-casing, replacing punctuation by spaces and collapsing whitespace) have exact Jaccard similarity at least `threshold`. Candidates come from MinHash signatures with LSH banding (Broder 1997; Leskovec, Rajaraman & Ullman, Mining of Massive Datasets ch. 3): with b bands of r rows a pair of similarity s becomes a candidate with probability 1-(1-s^r)^b (0.99964 at s=0.8 for the defaults). A copied note lets a model memorise its label.",
		Requires: []string{"text"},
		Params: []Param{
			{"threshold", 0.8, "exact Jaccard similarity at or above which a pair is reported"},
			{"k", 5, "shingle size: characters (5, as Mining of Massive Datasets §3.2.2 suggests for short documents) or words"},
			{"words", 0, "1: word shingles instead of character shingles"},
			{"bands", 20, "LSH bands b"},
			{"rows", 5, "rows per band r (b·r MinHash functions)"},
			{"error_at", 0.95, "Jaccard at or above which a pair is an error rather than a warning"},
		},
		SQL: "tool",
		run: runNearDuplicateText,
	}
	NearDuplicateNumeric = &Check{
		Name:  "near_duplicate_numeric",
		Title: "rows equal across sides once numbers are rounded to a few significant digits",
		Doc:   "Rows on different sides whose feature values agree when every numeric value (INTEGER and REAL) is rounded to `digits` significant digits and text is normalised as in exact_duplicate, but that are not exact duplicates: the same record measured or exported twice with small numeric noise. Found by grouping on the rounded values (no all-pairs comparison). Rounding splits values that straddle a boundary (1.2349 and 1.2351 at 3 digits); with `tol` > 0 the check instead links rows whose every numeric feature is within that relative distance (text equal, NULLs alike), found through a grid on the log scale (each row looks only at neighbouring cells) and confirmed pair by pair. Needs at least one numeric feature column.",
		Params: []Param{{"digits", 3, "significant digits numbers are rounded to"},
			{"tol", 0, "0: round to digits; in (0, 1): instead, rows whose every numeric feature agrees within this relative tolerance, |x-y| <= tol*max(|x|,|y|), text equal and NULLs alike, linked into groups (no rounding boundary to fall on)"}},
		SQL: "stock",
		run: runNearDuplicateNumeric,
	}
	SharedEntity = &Check{
		Name:     "shared_entity",
		Title:    "an entity with rows on more than one side",
		Doc:      "For each entity column (--entity, by default the split's group columns) one finding when any non-NULL value has rows on more than one side: how many values do, and how many rows on each side they hold; each such value and its row count per side are listed in ss_finding_items (not its rows in ss_finding_rows: the value identifies them, and a stored report query lists them). When the entity columns are the split's own two or more group columns (the default), they are one entity as the split formed it: rows sharing a value in any of them are one entity (connected components), named by its first member value (column order, then value). Rows of one entity (a pipe segment, a customer) are correlated: a model that saw some of them in training scores the rest too well.",
		Requires: []string{"entity"},
		SQL:      "stock",
		run:      runSharedEntity,
	}
	TimeOverlap = &Check{
		Name:     "time_overlap",
		Title:    "training rows from the holdout period, interleaved entity histories, a gap shorter than specified",
		Doc:      "With --time (default: the split's time column): training rows later than the start of the holdout period (error); entities (entity columns) whose training rows are later than their first holdout row (warn, one finding per entity column with each such entity as an item in ss_finding_items); and, when the split's spec states a gap, a gap between the last training time and the first holdout time shorter than it (error). A model trained on the future of its holdout looks better than it will be.",
		Requires: []string{"time"},
		SQL:      "stock",
		run:      runTimeOverlap,
	}
	LabelConflict = &Check{
		Name:     "label_conflict",
		Title:    "identical features with different labels",
		Doc:      "Groups of rows with equal feature values (normalised as in exact_duplicate) and more than one distinct non-NULL label: within one side (warn: label noise that caps any model's accuracy) and across sides (error: the holdout contradicts training on the same input).",
		Requires: []string{"label"},
		SQL:      "stock",
		run:      runLabelConflict,
	}
	LeakingFeature = &Check{
		Name:     "leaking_feature",
		Title:    "a single column that predicts the label too well on its own",
		Doc:      "For a binary label: each numeric column's AUC (Mann–Whitney U / (n1·n0), ties counted one half), each categorical column's AUC when every row is scored by its level's positive share (levels with fewer than `min_level` rows pooled), and each column's missingness AUC (is the value missing for one class?). A text label of three or more classes (at most max_levels) gets the same measures one class against the rest, keeping per column and measure the class it separates best. For a numeric label: each numeric column's Spearman rank correlation. A column flagged here is often recorded after the outcome (a work order opened because the pipe failed) and will not exist at prediction time.",
		Requires: []string{"label"},
		Params: []Param{
			{"auc", 0.95, "flag AUC at or above this, or at or below 1 minus it (rule of thumb, no published source)"},
			{"rho", 0.95, "flag |Spearman rho| at or above this (rule of thumb, no published source)"},
			{"min_level", 5, "categorical levels with fewer rows are pooled into one"},
			{"max_levels", 1000, "categorical columns with more distinct values are skipped (identifier-like)"},
		},
		SQL: "tool",
		run: runLeakingFeature,
	}
	DistributionShift = &Check{
		Name:  "distribution_shift",
		Title: "a column (or the label) distributed differently on the holdout than in training",
		Doc:   "Per column, training side against each holdout side: Population Stability Index over the training side's deciles (numeric) or levels (categorical), missing values a bin of their own, empty-bin share 0.0001; the two-sample Kolmogorov–Smirnov D with its p-value (exact for n1·n2 ≤ 10000, else asymptotic) for numeric columns; the chi-square test of homogeneity with Cramér's V for categorical ones (p-values from gonum's distributions). The label is tested too (subject label:COL). PSI thresholds 0.1 (warn) and 0.25 (error) are common practice, no published source.",
		Params: []Param{
			{"psi_warn", 0.1, "PSI at or above which a column is a warning (common practice, no published source)"},
			{"psi_error", 0.25, "PSI at or above which a column is an error (common practice, no published source)"},
			{"alpha", 0.001, "p-value below which a test is reported (as a warning when the effect, KS D or Cramér's V, is at least `effect`)"},
			{"effect", 0.1, "KS D or Cramér's V at or above which a significant test is a warning (rule of thumb, no published source)"},
			{"max_levels", 100, "categorical columns with more distinct values are skipped"},
		},
		SQL: "tool",
		run: runDistributionShift,
	}
	HoldoutAdequacy = &Check{
		Name:  "holdout_adequacy",
		Title: "whether the holdout is large enough to tell two models apart",
		Doc:   "With n holdout rows, the standard error of an error rate p is sqrt(p(1-p)/n). Two models `points` percentage points apart are told apart at level `alpha` only when points/100 ≥ z·sqrt(2)·SE (two independent estimates; a paired test on the same rows can do better, so this screen is conservative). Warns when the holdout is smaller than that and states the rows needed. This is a planning figure, not a guarantee: defer to local rules and a qualified statistical review.",
		Params: []Param{
			{"error_rate", 0.1, "the error rate p the models are expected to have"},
			{"points", 2, "the difference between models, in percentage points, the holdout must resolve"},
			{"alpha", 0.05, "two-sided significance level"},
		},
		SQL: "none",
		run: runHoldoutAdequacy,
	}
)

// All returns the check catalog in report order.
func All() []*Check {
	return []*Check{ExactDuplicate, NearDuplicateText, NearDuplicateNumeric, SharedEntity, TimeOverlap, LabelConflict, LeakingFeature, DistributionShift, HoldoutAdequacy}
}

// Lookup returns the check of that name, or nil.
func Lookup(name string) *Check {
	for _, c := range All() {
		if c.Name == name {
			return c
		}
	}
	return nil
}

// Names lists the catalog's check names.
func Names() []string {
	var out []string
	for _, c := range All() {
		out = append(out, c.Name)
	}
	return out
}

var checkName = regexp.MustCompile(`^[a-z][a-z0-9_]*$`)

// Validate checks a catalog: unique lower_snake names, a title and doc, a known SQL kind,
// documented parameters with finite defaults, and a run function.
func Validate(cs []*Check) error {
	seen := map[string]bool{}
	var errs []error
	for _, c := range cs {
		switch {
		case !checkName.MatchString(c.Name):
			errs = append(errs, fmt.Errorf("leakage: check name %q is not lower_snake", c.Name))
		case seen[c.Name]:
			errs = append(errs, fmt.Errorf("leakage: check %q listed twice", c.Name))
		}
		seen[c.Name] = true
		if strings.TrimSpace(c.Title) == "" || strings.TrimSpace(c.Doc) == "" {
			errs = append(errs, fmt.Errorf("leakage: check %q has no title or doc", c.Name))
		}
		if c.SQL != "stock" && c.SQL != "tool" && c.SQL != "none" {
			errs = append(errs, fmt.Errorf("leakage: check %q: SQL %q is not stock, tool or none", c.Name, c.SQL))
		}
		if c.run == nil {
			errs = append(errs, fmt.Errorf("leakage: check %q has no run function", c.Name))
		}
		for _, r := range c.Requires {
			if r != "label" && r != "time" && r != "text" && r != "entity" {
				errs = append(errs, fmt.Errorf("leakage: check %q requires unknown option %q", c.Name, r))
			}
		}
		pseen := map[string]bool{}
		for _, p := range c.Params {
			if !checkName.MatchString(p.Name) || pseen[p.Name] || strings.TrimSpace(p.Doc) == "" || math.IsNaN(p.Default) || math.IsInf(p.Default, 0) {
				errs = append(errs, fmt.Errorf("leakage: check %q: parameter %q is badly declared", c.Name, p.Name))
			}
			pseen[p.Name] = true
		}
	}
	return errors.Join(errs...)
}

// Finding is one result of a check.
type Finding struct {
	Check    string
	Severity Severity
	Subject  string // what was examined
	Item     string // which one ("" for none)
	HasItem  bool
	Sides    []SideRows // rows involved, per side in split order
	// Items are the groups involved when a group is the unit (shared_entity: each shared
	// entity and its rows per side), in order of first row; stored in ss_finding_items.
	Items []Item
	// Without Sides (statistics over whole sides), the sides compared and their row counts.
	SideA, SideB string
	NA, NB       int
	Score        float64 // NaN when the check has no measure
	Message      string
	Evidence     map[string]any
	Query        string // audit query name that recomputes it ("" for none)
	anchor       int64  // smallest row involved, for ordering
}

// Item is one group a finding involves: its name, smallest row and row count per side.
type Item struct {
	Name     string
	FirstRow int64      // smallest row id of the group, on any side
	Sides    []SideRows // per side in split order: Side and N (Rows stays nil)
}

// SideRows are the rows of one side involved in a finding.
type SideRows struct {
	Side string
	Rows []int64 // ascending
	N    int     // in an Item: the group's row count on the side (Rows is nil)
}

// InputError is a bad option or argument: an unknown column, check or parameter, a label
// with one class, an all-empty text column. Nothing is written.
type InputError struct{ Msg string }

func (e *InputError) Error() string { return e.Msg }

func inputf(format string, a ...any) error { return &InputError{Msg: fmt.Sprintf(format, a...)} }

// ParseChecks resolves a comma-separated --checks value (empty: all) into catalog order.
func ParseChecks(list []string) ([]*Check, error) {
	if len(list) == 0 {
		return All(), nil
	}
	want := map[string]bool{}
	for _, n := range list {
		n = strings.TrimSpace(n)
		if n == "" {
			continue
		}
		if Lookup(n) == nil {
			return nil, inputf("--checks: unknown check %q (known: %s)", n, strings.Join(Names(), ", "))
		}
		want[n] = true
	}
	var out []*Check
	for _, c := range All() {
		if want[c.Name] {
			out = append(out, c)
		}
	}
	return out, nil
}

// ParseParams resolves --param CHECK.NAME=VALUE settings against the catalog.
func ParseParams(settings []string) (map[string]float64, error) {
	out := map[string]float64{}
	for _, s := range settings {
		k, v, ok := strings.Cut(s, "=")
		cn, pn, ok2 := strings.Cut(k, ".")
		if !ok || !ok2 {
			return nil, inputf("--param %q: want CHECK.NAME=VALUE (e.g. near_duplicate_text.threshold=0.9)", s)
		}
		c := Lookup(cn)
		if c == nil {
			return nil, inputf("--param %q: unknown check %q (known: %s)", s, cn, strings.Join(Names(), ", "))
		}
		found := false
		var names []string
		for _, p := range c.Params {
			names = append(names, p.Name)
			if p.Name == pn {
				found = true
			}
		}
		if !found {
			sort.Strings(names)
			return nil, inputf("--param %q: check %s has no parameter %q (it has: %s)", s, cn, pn, strings.Join(names, ", "))
		}
		var f float64
		if _, err := fmt.Sscan(v, &f); err != nil || math.IsNaN(f) || math.IsInf(f, 0) {
			return nil, inputf("--param %q: value %q is not a number", s, v)
		}
		out[k] = f
	}
	return out, nil
}
