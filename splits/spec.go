package splits

import (
	"bytes"
	"encoding/json"
	"errors"
	"fmt"
	"math"
	"regexp"
	"sort"
	"strconv"
	"strings"
	"time"

	"gopkg.in/yaml.v3"
)

// SpecVersion is the only spec file version this package reads.
const SpecVersion = 1

// Side is one side of a split and its target fraction (0 for adopted splits).
type Side struct {
	Name     string  `json:"name" yaml:"name"`
	Fraction float64 `json:"fraction,omitempty" yaml:"fraction"`
}

// Sides is an ordered list of sides. In a spec file it is either a list of {name, fraction}
// or the flag form "train=0.8,holdout=0.2".
type Sides []Side

// UnmarshalYAML accepts the list form and the string form.
func (s *Sides) UnmarshalYAML(n *yaml.Node) error {
	if n.Kind == yaml.ScalarNode {
		v, err := ParseSides(n.Value)
		if err != nil {
			return err
		}
		*s = v
		return nil
	}
	var l []Side
	if err := n.Decode(&l); err != nil {
		return err
	}
	*s = l
	return nil
}

// Spec is a split specification. Flags and spec files resolve to the same Spec; its
// canonical JSON (CanonicalJSON) is what ss_splits.spec_json stores. Zero values mean the
// documented defaults, which Resolve fills in.
type Spec struct {
	Version int    `json:"version" yaml:"version"`
	Name    string `json:"name" yaml:"name"`
	Table   string `json:"table" yaml:"table"`
	Seed    uint64 `json:"seed" yaml:"seed"`
	Sides   Sides  `json:"sides" yaml:"sides"`
	// Key columns hashed for random and stratified splits; empty = the content digest.
	Key []string `json:"key,omitempty" yaml:"key"`
	// Stratify column; StratifyMode "exact" (default: per-stratum quotas within one row) or
	// "hash" (pure hash thresholds, append-stable, proportions only approximate).
	Stratify     string `json:"stratify,omitempty" yaml:"stratify"`
	StratifyMode string `json:"stratify_mode,omitempty" yaml:"stratify_mode"`
	// Group columns: rows sharing a value in any of them are one entity. GroupNulls "own"
	// (default: a row with NULL in every group column is its own entity) or "refuse".
	Group      []string `json:"group,omitempty" yaml:"group"`
	GroupNulls string   `json:"group_nulls,omitempty" yaml:"group_nulls"`
	// Time column: the last side(s) hold the latest period, by Cutoff or by fractions in time
	// order. Gap is a duration ("30d", "12h", or a number for a numeric time column) before
	// each boundary whose rows are dropped; GapRows drops that many rows instead. LabelEnd
	// is the column holding when a row's label became known: earlier-side rows whose label
	// end reaches the next side's start are purged. Span says what to do with an entity that
	// spans a boundary: "drop" (default), "earlier" (keep it wholly on the earlier side) or
	// "entity" (side by the entity's hash; its rows on the wrong side of the cutoff dropped).
	// Until is the latest plausible time: rows whose time is later are dropped (reason
	// "after_until") before cutoffs and fractions are computed; an entity's other rows stay.
	Time     string `json:"time,omitempty" yaml:"time"`
	Cutoff   string `json:"cutoff,omitempty" yaml:"cutoff"`
	Until    string `json:"until,omitempty" yaml:"until"`
	Gap      string `json:"gap,omitempty" yaml:"gap"`
	GapRows  int    `json:"gap_rows,omitempty" yaml:"gap_rows"`
	LabelEnd string `json:"label_end,omitempty" yaml:"label_end"`
	Span     string `json:"span,omitempty" yaml:"span"`
	// TimeInvalid says what to do with rows whose time (or label end) is NULL or does not
	// parse: "refuse" (default: the split fails, naming the rows) or "drop" (reason "time").
	TimeInvalid string `json:"time_invalid,omitempty" yaml:"time_invalid"`
	// Folds K > 1: k folds within the train side (random: hash; stratified: round-robin in
	// hash order; grouped: balanced by rows; time: rolling origin with TestSize rows each).
	Folds    int `json:"folds,omitempty" yaml:"folds"`
	TestSize int `json:"test_size,omitempty" yaml:"test_size"`
	// Adopted: FromColumn (a user column, or ss_source for the input file) gives each row's
	// side, through Map (value → side; default: the value itself, and for ss_source the file's
	// base name without .csv/.tsv/.jsonl/.json/.txt/.gz). FoldColumn adopts integer folds.
	FromColumn string            `json:"from_column,omitempty" yaml:"from_column"`
	Map        map[string]string `json:"map,omitempty" yaml:"map"`
	FoldColumn string            `json:"fold_column,omitempty" yaml:"fold_column"`
	// Roles: which side is train and which holdout (default: "train"; "holdout" or "test").
	TrainSide   string `json:"train_side,omitempty" yaml:"train_side"`
	HoldoutSide string `json:"holdout_side,omitempty" yaml:"holdout_side"`
}

// FieldError is a bad value in a spec, located by its field path (e.g. "sides[1].fraction")
// and, when the spec came from a file, the file. Callers treat it as a usage error.
type FieldError struct {
	File  string // spec file, or "" for flags
	Field string
	Msg   string
}

func (e *FieldError) Error() string {
	if e.File == "" {
		return fmt.Sprintf("%s: %s", flagFor(e.Field), e.Msg)
	}
	return fmt.Sprintf("%s: %s: %s", e.File, e.Field, e.Msg)
}

func fieldErr(field, format string, a ...any) error {
	return &FieldError{Field: field, Msg: fmt.Sprintf(format, a...)}
}

// flagFor names the command-line flag of a spec field path.
func flagFor(field string) string {
	base := field
	if i := strings.IndexAny(base, ".["); i >= 0 {
		base = base[:i]
	}
	f := map[string]string{"name": "--name", "table": "--table", "seed": "--seed", "sides": "--sides", "key": "--key",
		"stratify": "--stratify", "stratify_mode": "--stratify-mode", "group": "--group", "group_nulls": "--group-nulls",
		"time": "--time", "cutoff": "--cutoff", "until": "--until", "gap": "--gap", "gap_rows": "--gap-rows", "label_end": "--label-end",
		"span": "--span", "time_invalid": "--time-invalid", "folds": "--folds", "test_size": "--test-size", "from_column": "--from-column", "map": "--map",
		"fold_column": "--fold-column", "train_side": "--train-side", "holdout_side": "--holdout-side", "version": "version", "split": "--split", "side": "--side", "fold": "--fold", "part": "--part", "format": "--format"}[base]
	if f == "" {
		return field
	}
	return f
}

// ParseSides parses "train=0.8,holdout=0.2".
func ParseSides(s string) (Sides, error) {
	var out Sides
	for i, part := range strings.Split(s, ",") {
		part = strings.TrimSpace(part)
		name, frac, ok := strings.Cut(part, "=")
		if !ok {
			return nil, fmt.Errorf("side %d %q: want NAME=FRACTION", i+1, part)
		}
		f, err := strconv.ParseFloat(strings.TrimSpace(frac), 64)
		if err != nil {
			return nil, fmt.Errorf("side %d %q: fraction %q is not a number", i+1, part, frac)
		}
		out = append(out, Side{Name: strings.TrimSpace(name), Fraction: f})
	}
	return out, nil
}

// String renders sides in the flag form.
func (s Sides) String() string {
	parts := make([]string, len(s))
	for i, x := range s {
		parts[i] = x.Name + "=" + strconv.FormatFloat(x.Fraction, 'g', -1, 64)
	}
	return strings.Join(parts, ",")
}

// ParseMap parses "VALUE=SIDE,...".
func ParseMap(s string) (map[string]string, error) {
	m := map[string]string{}
	for i, part := range strings.Split(s, ",") {
		v, side, ok := strings.Cut(part, "=")
		if !ok || side == "" {
			return nil, fmt.Errorf("entry %d %q: want VALUE=SIDE", i+1, part)
		}
		if _, dup := m[v]; dup {
			return nil, fmt.Errorf("entry %d: value %q mapped twice", i+1, v)
		}
		m[v] = side
	}
	return m, nil
}

// ParseSpec reads a spec file: TOML when file ends in .toml, else YAML (JSON is YAML too).
// Unknown fields are refused. file names the file in errors.
func ParseSpec(data []byte, file string) (*Spec, error) {
	if strings.HasSuffix(strings.ToLower(file), ".toml") {
		return parseSpecTOML(data, file)
	}
	return parseSpecYAML(data, file)
}

func parseSpecYAML(data []byte, file string) (*Spec, error) {
	dec := yaml.NewDecoder(bytes.NewReader(data))
	dec.KnownFields(true)
	s := Spec{Seed: 1} // the flag's default, so a file without seed means what the flags mean
	if err := dec.Decode(&s); err != nil {
		if errors.Is(err, errEOF) || strings.Contains(err.Error(), "EOF") {
			return nil, &FieldError{File: file, Field: "version", Msg: "empty spec file"}
		}
		return nil, fmt.Errorf("%s: %w", file, yamlErr(err))
	}
	if s.Version != SpecVersion {
		return nil, &FieldError{File: file, Field: "version", Msg: fmt.Sprintf("must be %d (got %d)", SpecVersion, s.Version)}
	}
	return &s, nil
}

var errEOF = errors.New("EOF")

func yamlErr(err error) error {
	var te *yaml.TypeError
	if errors.As(err, &te) {
		return errors.New(strings.Join(te.Errors, "; "))
	}
	return err
}

var nameRE = regexp.MustCompile(`^[A-Za-z][A-Za-z0-9_]*$`)

// checkName checks a split or side name: letters, digits, underscore, starting with a
// letter, not reserved.
func checkName(field, kind, n string) error {
	l := strings.ToLower(n)
	switch {
	case n == "":
		return fieldErr(field, "%s name is empty", kind)
	case !nameRE.MatchString(n):
		return fieldErr(field, "%s name %q must be letters, digits and _ starting with a letter", kind, n)
	case strings.HasPrefix(l, "ss_") || strings.HasPrefix(l, "sqlite_"):
		return fieldErr(field, "%s name %q is reserved (ss_ and sqlite_ belong to splitsmith and SQLite)", kind, n)
	}
	return nil
}

// Strategy names the spec's strategy: adopted, time, stratified-grouped, grouped,
// stratified or random.
func (s *Spec) Strategy() string {
	switch {
	case s.FromColumn != "" || s.FoldColumn != "":
		return "adopted"
	case s.Time != "":
		return "time"
	case len(s.Group) > 0 && s.Stratify != "":
		return "stratified-grouped"
	case len(s.Group) > 0:
		return "grouped"
	case s.Stratify != "":
		return "stratified"
	}
	return "random"
}

// FoldScheme is "kfold", "rolling", "adopted" or "" (no folds).
func (s *Spec) FoldScheme() string {
	switch {
	case s.FoldColumn != "":
		return "adopted"
	case s.Folds == 0:
		return ""
	case s.Time != "":
		return "rolling"
	}
	return "kfold"
}

// Resolve fills defaults and checks everything that does not need the data.
func (s *Spec) Resolve() error {
	if s.Version == 0 {
		s.Version = SpecVersion
	}
	if err := checkName("name", "split", s.Name); err != nil {
		return err
	}
	if s.Table == "" {
		return fieldErr("table", "table name is empty")
	}
	adopted := s.Strategy() == "adopted"
	if len(s.Sides) == 0 && !adopted {
		switch {
		case s.Folds > 0:
			s.Sides = Sides{{"train", 1}}
		default:
			s.Sides = Sides{{"train", 0.8}, {"holdout", 0.2}}
		}
	}
	if adopted {
		if len(s.Sides) > 0 {
			return fieldErr("sides", "an adopted split takes its sides from --from-column; give --map, not --sides")
		}
		for _, f := range []struct{ field, v string }{{"stratify", s.Stratify}, {"time", s.Time}, {"key", strings.Join(s.Key, ",")}} {
			if f.v != "" {
				return fieldErr(f.field, "cannot be combined with --from-column/--fold-column (an adopted split is taken as it is)")
			}
		}
		if s.Folds != 0 {
			return fieldErr("folds", "an adopted split takes folds from --fold-column")
		}
	} else if len(s.Map) > 0 {
		return fieldErr("map", "--map needs --from-column")
	}
	seen := map[string]int{}
	sum := 0.0
	for i, sd := range s.Sides {
		f := fmt.Sprintf("sides[%d]", i+1)
		if err := checkName(f+".name", "side", sd.Name); err != nil {
			return err
		}
		if j, dup := seen[strings.ToLower(sd.Name)]; dup {
			return fieldErr(f+".name", "side %q is repeated (sides %d and %d)", sd.Name, j, i+1)
		}
		seen[strings.ToLower(sd.Name)] = i + 1
		if math.IsNaN(sd.Fraction) || sd.Fraction <= 0 || sd.Fraction > 1 {
			return fieldErr(f+".fraction", "fraction of side %q must be in (0, 1], got %s", sd.Name, strconv.FormatFloat(sd.Fraction, 'g', -1, 64))
		}
		sum += sd.Fraction
	}
	if !adopted && math.Abs(sum-1) > 1e-9 {
		return fieldErr("sides", "fractions must sum to 1, got %s (%s)", strconv.FormatFloat(sum, 'g', 10, 64), s.Sides)
	}
	switch s.StratifyMode {
	case "":
		if s.Stratify != "" {
			s.StratifyMode = "exact"
		}
	case "exact", "hash":
		if s.Stratify == "" {
			return fieldErr("stratify_mode", "needs --stratify")
		}
	default:
		return fieldErr("stratify_mode", "%q is not one of exact, hash", s.StratifyMode)
	}
	switch s.GroupNulls {
	case "":
		if len(s.Group) > 0 {
			s.GroupNulls = "own"
		}
	case "own", "refuse":
		if len(s.Group) == 0 {
			return fieldErr("group_nulls", "needs --group")
		}
	default:
		return fieldErr("group_nulls", "%q is not one of own, refuse", s.GroupNulls)
	}
	for i, g := range s.Group {
		for j := 0; j < i; j++ {
			if s.Group[j] == g {
				return fieldErr(fmt.Sprintf("group[%d]", i+1), "column %q is repeated", g)
			}
		}
	}
	if len(s.Key) > 0 && len(s.Group) > 0 {
		return fieldErr("key", "a grouped split hashes each entity's key, not --key; drop one of them")
	}
	for i, k := range s.Key {
		for j := 0; j < i; j++ {
			if s.Key[j] == k {
				return fieldErr(fmt.Sprintf("key[%d]", i+1), "column %q is repeated", k)
			}
		}
	}
	if s.Time == "" {
		for _, f := range []struct{ field, v string }{{"cutoff", s.Cutoff}, {"until", s.Until}, {"gap", s.Gap}, {"label_end", s.LabelEnd}, {"span", s.Span}} {
			if f.v != "" {
				return fieldErr(f.field, "needs --time")
			}
		}
		if s.GapRows != 0 {
			return fieldErr("gap_rows", "needs --time")
		}
		if s.TestSize != 0 {
			return fieldErr("test_size", "needs --time and --folds (rolling origin)")
		}
		if s.TimeInvalid != "" {
			return fieldErr("time_invalid", "needs --time")
		}
	} else {
		switch s.TimeInvalid {
		case "":
			s.TimeInvalid = "refuse"
		case "refuse", "drop":
		default:
			return fieldErr("time_invalid", "%q is not one of refuse, drop", s.TimeInvalid)
		}
		if s.Stratify != "" {
			return fieldErr("stratify", "a time-ordered split cannot also be stratified")
		}
		if len(s.Key) > 0 {
			return fieldErr("key", "a time-ordered split orders rows by --time, not by a hash key")
		}
		if s.Gap != "" && s.GapRows != 0 {
			return fieldErr("gap_rows", "give --gap or --gap-rows, not both")
		}
		if s.GapRows < 0 {
			return fieldErr("gap_rows", "must be 0 or more, got %d", s.GapRows)
		}
		if s.Cutoff != "" && len(s.Sides) != 2 {
			return fieldErr("cutoff", "a cutoff splits the rows in two; give two sides, not %d", len(s.Sides))
		}
		if s.Cutoff != "" && s.Folds > 0 {
			return fieldErr("cutoff", "rolling-origin folds place their own cutoffs; drop --cutoff")
		}
		switch s.Span {
		case "":
			if len(s.Group) > 0 {
				s.Span = "drop"
			}
		case "drop", "earlier", "entity":
			if len(s.Group) == 0 {
				return fieldErr("span", "needs --group")
			}
		default:
			return fieldErr("span", "%q is not one of drop, earlier, entity", s.Span)
		}
		if s.TestSize < 0 {
			return fieldErr("test_size", "must be positive, got %d", s.TestSize)
		}
		if s.TestSize > 0 && s.Folds == 0 {
			return fieldErr("test_size", "needs --folds")
		}
		if s.Until != "" {
			if _, ok := ParseTimeText(s.Until); !ok {
				if _, _, ok := timeValue(s.Until, true); !ok {
					return fieldErr("until", "%q is not a date (2026-12-31), timestamp (2026-12-31T23:59:59Z) or number", s.Until)
				}
			}
		}
		if s.Gap != "" {
			if _, err := ParseGap(s.Gap, false); err != nil {
				if _, err2 := ParseGap(s.Gap, true); err2 != nil {
					return fieldErr("gap", "%v", err)
				}
			}
		}
	}
	if s.Folds < 0 || s.Folds == 1 {
		return fieldErr("folds", "must be 2 or more, got %d", s.Folds)
	}
	if s.Folds > 1000 {
		return fieldErr("folds", "must be at most 1000, got %d", s.Folds)
	}
	if !adopted {
		if err := s.resolveRoles(); err != nil {
			return err
		}
	}
	return nil
}

// resolveRoles fills TrainSide and HoldoutSide from the side names (or checks the given ones).
func (s *Spec) resolveRoles() error {
	names := make([]string, len(s.Sides))
	for i, sd := range s.Sides {
		names[i] = sd.Name
	}
	return resolveRoles(s, names)
}

func resolveRoles(s *Spec, names []string) error {
	has := func(n string) bool {
		for _, x := range names {
			if x == n {
				return true
			}
		}
		return false
	}
	if s.TrainSide != "" && !has(s.TrainSide) {
		return fieldErr("train_side", "%q is not a side (sides: %s)", s.TrainSide, strings.Join(names, ", "))
	}
	if s.HoldoutSide != "" && !has(s.HoldoutSide) {
		return fieldErr("holdout_side", "%q is not a side (sides: %s)", s.HoldoutSide, strings.Join(names, ", "))
	}
	if s.TrainSide == "" && has("train") && s.HoldoutSide != "train" {
		s.TrainSide = "train"
	}
	if s.HoldoutSide == "" {
		for _, c := range []string{"holdout", "test"} {
			if has(c) && s.TrainSide != c {
				s.HoldoutSide = c
				break
			}
		}
	}
	if s.TrainSide != "" && s.TrainSide == s.HoldoutSide {
		return fieldErr("holdout_side", "side %q cannot be both train and holdout", s.TrainSide)
	}
	return nil
}

// Role returns the role of a side: train, holdout or other.
func (s *Spec) Role(side string) string {
	switch side {
	case s.TrainSide:
		return "train"
	case s.HoldoutSide:
		return "holdout"
	}
	return "other"
}

// CanonicalJSON is the spec as stored: fixed field order, defaults filled, no empty fields.
func (s *Spec) CanonicalJSON() string {
	b, _ := json.Marshal(s) // map keys are sorted by encoding/json
	return string(b)
}

// SpecFromJSON reads a stored canonical spec.
func SpecFromJSON(s string) (*Spec, error) {
	var sp Spec
	if err := json.Unmarshal([]byte(s), &sp); err != nil {
		return nil, fmt.Errorf("stored spec: %w", err)
	}
	return &sp, nil
}

// gapTerm is one number-and-unit term of a gap ("30d" in "1w2d").
var gapTerm = regexp.MustCompile(`^([0-9]+(?:\.[0-9]+)?)(w|d|h|m|s|ms)`)

// ParseGap parses a gap as the split reads it: a Go duration with d (days) and w (weeks)
// allowed ("30d", "12h", "1w2d"), in seconds; or, numeric, a plain number in the time
// column's own unit. The audit uses it too, so both read a spec's gap alike.
func ParseGap(s string, numeric bool) (float64, error) {
	if numeric {
		f, err := strconv.ParseFloat(s, 64)
		if err != nil || f < 0 || math.IsNaN(f) || math.IsInf(f, 0) {
			return 0, fmt.Errorf("gap %q: the time column is numeric, so the gap must be a non-negative number", s)
		}
		return f, nil
	}
	rest := s
	total := 0.0
	if rest == "" {
		return 0, fmt.Errorf("gap is empty")
	}
	for rest != "" {
		m := gapTerm.FindStringSubmatch(rest)
		if m == nil {
			return 0, fmt.Errorf("gap %q: want a duration such as 30d, 12h, 1w2d or 90m", s)
		}
		v, _ := strconv.ParseFloat(m[1], 64)
		unit := map[string]float64{"w": 7 * 86400, "d": 86400, "h": 3600, "m": 60, "s": 1, "ms": 0.001}[m[2]]
		total += v * unit
		rest = rest[len(m[0]):]
	}
	return total, nil
}

// timeLayouts are the text forms a time column may hold (DATE and TIMESTAMP storage).
var timeLayouts = []string{"2006-01-02", time.RFC3339Nano, "2006-01-02T15:04:05.999999999", "2006-01-02 15:04:05.999999999", "2006-01-02 15:04:05Z07:00", "2006-01-02T15:04"}

// ParseTimeText parses a DATE or TIMESTAMP text value to Unix seconds (a value without a zone
// is read as UTC, for ordering only).
func ParseTimeText(v string) (float64, bool) {
	if len(v) == 10 && v[4] == '-' && v[7] == '-' {
		// Fast path for DATE (YYYY-MM-DD): the common case, parsed without time.Parse.
		y, ok1 := digits(v[0:4])
		m, ok2 := digits(v[5:7])
		d, ok3 := digits(v[8:10])
		if !ok1 || !ok2 || !ok3 || m < 1 || m > 12 || d < 1 {
			return 0, false
		}
		t := time.Date(y, time.Month(m), d, 0, 0, 0, 0, time.UTC)
		if t.Day() != d {
			return 0, false // 2023-02-30
		}
		return float64(t.Unix()), true
	}
	for _, l := range timeLayouts {
		if t, err := time.Parse(l, v); err == nil {
			return float64(t.Unix()) + float64(t.Nanosecond())/1e9, true
		}
	}
	return 0, false
}

func digits(s string) (int, bool) {
	n := 0
	for i := 0; i < len(s); i++ {
		c := s[i]
		if c < '0' || c > '9' {
			return 0, false
		}
		n = n*10 + int(c-'0')
	}
	return n, true
}

func sortedKeys(m map[string]string) []string {
	k := make([]string, 0, len(m))
	for x := range m {
		k = append(k, x)
	}
	sort.Strings(k)
	return k
}
