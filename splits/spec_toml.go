package splits

import (
	"encoding/json"
	"errors"
	"fmt"
	"reflect"
	"regexp"
	"sort"
	"strings"
	"time"

	"github.com/BurntSushi/toml"
)

// parseSpecTOML reads a TOML spec file: the same fields as YAML (the Spec's json names),
// sides as a string ("train=0.8,holdout=0.2") or an array of tables ([[sides]] name, fraction).
// The document is decoded into plain values, checked for unknown fields (named with the line
// they are on), and handed to the YAML reader as JSON, so both formats mean the same thing.
func parseSpecTOML(data []byte, file string) (*Spec, error) {
	var doc map[string]any
	if _, err := toml.Decode(string(data), &doc); err != nil {
		var pe toml.ParseError
		if errors.As(err, &pe) {
			return nil, fmt.Errorf("%s:%d:%d: %s", file, pe.Position.Line, pe.Position.Col, pe.Message)
		}
		return nil, fmt.Errorf("%s: %w", file, err)
	}
	if len(doc) == 0 {
		return nil, &FieldError{File: file, Field: "version", Msg: "empty spec file"}
	}
	known := specFieldNames()
	var keys []string
	for k := range doc {
		keys = append(keys, k)
	}
	sort.Strings(keys)
	for _, k := range keys {
		if !known[k] {
			return nil, fmt.Errorf("%s: unknown field %q (fields: %s)", tomlWhere(file, data, k), k, strings.Join(sortedNames(known), ", "))
		}
	}
	if sides, ok := doc["sides"].([]map[string]any); ok {
		for i, s := range sides {
			for k := range s {
				if k != "name" && k != "fraction" {
					return nil, fmt.Errorf("%s: sides[%d]: unknown field %q (fields: name, fraction)", tomlWhere(file, data, k), i, k)
				}
			}
		}
	}
	if err := tomlTypeCheck(file, data, doc); err != nil {
		return nil, err
	}
	plain, err := json.Marshal(tomlPlain(doc))
	if err != nil {
		return nil, fmt.Errorf("%s: %w", file, err)
	}
	return parseSpecYAML(plain, file)
}

// tomlPlain turns TOML dates and times into their text, as a quoted value would be.
func tomlPlain(v any) any {
	switch x := v.(type) {
	case map[string]any:
		out := map[string]any{}
		for k, e := range x {
			out[k] = tomlPlain(e)
		}
		return out
	case []map[string]any:
		out := make([]any, len(x))
		for i, e := range x {
			out[i] = tomlPlain(e)
		}
		return out
	case []any:
		out := make([]any, len(x))
		for i, e := range x {
			out[i] = tomlPlain(e)
		}
		return out
	case time.Time:
		switch x.Location().String() {
		case "date-local":
			return x.Format("2006-01-02")
		case "time-local":
			return x.Format("15:04:05.999999999")
		case "datetime-local":
			return x.Format("2006-01-02T15:04:05.999999999")
		}
		return x.Format(time.RFC3339Nano)
	}
	return v
}

// tomlTypeCheck refuses a value whose TOML type cannot fill the field (before the values
// lose their TOML lines): text fields want strings, counts integers, fractions numbers,
// column lists arrays of strings, map a table of strings, sides a string or [[sides]].
func tomlTypeCheck(file string, data []byte, doc map[string]any) error {
	t := reflect.TypeOf(Spec{})
	for i := 0; i < t.NumField(); i++ {
		f := t.Field(i)
		name, _, _ := strings.Cut(f.Tag.Get("json"), ",")
		v, ok := doc[name]
		if !ok {
			continue
		}
		var want string
		good := false
		switch {
		case f.Type == reflect.TypeOf(Sides{}):
			want = `a string such as "train=0.8,holdout=0.2" or [[sides]] tables`
			switch x := v.(type) {
			case string:
				good = true
			case []map[string]any:
				good = true
				for j, side := range x {
					if n, ok := side["name"]; ok {
						if _, isStr := n.(string); !isStr {
							return fmt.Errorf("%s: sides[%d].name: wants a string, got %v", tomlWhere(file, data, "name"), j, n)
						}
					}
					if fr, ok := side["fraction"]; ok {
						switch fr.(type) {
						case float64, int64:
						default:
							return fmt.Errorf("%s: sides[%d].fraction: wants a number, got %v", tomlWhere(file, data, "fraction"), j, fr)
						}
					}
				}
			}
		case f.Type.Kind() == reflect.String:
			want = "a string"
			switch v.(type) {
			case string, time.Time:
				good = true
			}
		case f.Type.Kind() == reflect.Int || f.Type.Kind() == reflect.Uint64:
			want = "an integer"
			x, isInt := v.(int64)
			good = isInt && (f.Type.Kind() == reflect.Int || x >= 0)
		case f.Type.Kind() == reflect.Slice:
			want = "an array of strings"
			if xs, isArr := v.([]any); isArr {
				good = true
				for _, e := range xs {
					if _, isStr := e.(string); !isStr {
						good = false
					}
				}
			}
		case f.Type.Kind() == reflect.Map:
			want = "a table of strings"
			if m, isMap := v.(map[string]any); isMap {
				good = true
				for _, e := range m {
					if _, isStr := e.(string); !isStr {
						good = false
					}
				}
			}
		}
		if !good {
			return fmt.Errorf("%s: %s: wants %s, got %v", tomlWhere(file, data, name), name, want, v)
		}
	}
	return nil
}

// tomlWhere is file:line of the first line that sets key (file alone when none does).
func tomlWhere(file string, data []byte, key string) string {
	re := regexp.MustCompile(`^\s*("?)` + regexp.QuoteMeta(key) + `("?)\s*=`)
	for i, line := range strings.Split(string(data), "\n") {
		if re.MatchString(line) {
			return fmt.Sprintf("%s:%d", file, i+1)
		}
	}
	return file
}

// specFieldNames are the Spec's field names in a spec file (its json names).
func specFieldNames() map[string]bool {
	out := map[string]bool{}
	t := reflect.TypeOf(Spec{})
	for i := 0; i < t.NumField(); i++ {
		if name, _, _ := strings.Cut(t.Field(i).Tag.Get("json"), ","); name != "" && name != "-" {
			out[name] = true
		}
	}
	return out
}

func sortedNames(m map[string]bool) []string {
	var out []string
	for k := range m {
		out = append(out, k)
	}
	sort.Strings(out)
	return out
}
