package ingest

import (
	"bytes"
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"unicode/utf8"
)

// jsonlReader reads JSON Lines: each non-blank line one JSON object. The first object's keys,
// in their order, are the columns; a later object may omit keys (NULL) but may not add any.
// Strings are taken as text; numbers as their literal text (typed like CSV values); true and
// false as "true"/"false"; null as missing; arrays and objects as their compact JSON text.
type jsonlReader struct {
	lines   *csvReader // TSV mode with no delimiter: one field per line
	cols    []string
	index   map[string]int
	r0      record
	vals    [][]byte
	store   []byte
	pending bool
	bounds  [][2]int
	present []bool
}

func newJSONLReader(r io.Reader) *jsonlReader {
	return &jsonlReader{lines: newCSVReader(r, '\n', false)}
}

func (j *jsonlReader) rec() *record { return &j.r0 }

func (j *jsonlReader) header() ([]string, int64, error) {
	var lr *record
	var line []byte
	for len(line) == 0 { // skip blank lines
		ok, err := j.lines.next()
		if err != nil {
			return nil, 0, err
		}
		if !ok {
			return nil, 0, errEmpty
		}
		lr = j.lines.rec()
		line = bytes.TrimSpace(lr.raw)
	}
	if !utf8.Valid(line) {
		return nil, lr.line, fmt.Errorf("invalid UTF-8 at byte %d", invalidAt(line)+1)
	}
	keys, _, err := j.parseObject(line, true)
	if err != nil {
		return nil, lr.line, err
	}
	if len(keys) == 0 {
		return nil, lr.line, errors.New("the first object has no keys, so there are no columns")
	}
	j.cols = keys
	j.index = make(map[string]int, len(keys))
	for i, k := range keys {
		j.index[k] = i
	}
	j.pending = true
	j.fill(lr)
	return keys, lr.line, nil
}

func (j *jsonlReader) next() (bool, error) {
	if j.pending {
		j.pending = false
		return true, nil
	}
	for {
		ok, err := j.lines.next()
		if err != nil || !ok {
			return ok, err
		}
		lr := j.lines.rec()
		if len(bytes.TrimSpace(lr.raw)) == 0 {
			continue
		}
		j.fill(lr)
		return true, nil
	}
}

// fill parses the current line into the record's fields, aligned with the columns.
func (j *jsonlReader) fill(lr *record) {
	r := &j.r0
	r.line, r.raw = lr.line, lr.raw
	r.problem, r.column, r.value = "", 0, ""
	line := bytes.TrimSpace(lr.raw)
	if !utf8.Valid(line) {
		r.problem = fmt.Sprintf("invalid UTF-8 at byte %d", invalidAt(line)+1)
		r.fields = nil
		return
	}
	if _, _, err := j.parseObject(line, false); err != nil {
		r.problem = err.Error()
		r.fields = nil
		return
	}
	if cap(j.vals) < len(j.cols) {
		j.vals = make([][]byte, len(j.cols))
	}
	j.vals = j.vals[:len(j.cols)]
	for i := range j.vals {
		if j.present[i] {
			j.vals[i] = j.store[j.bounds[i][0]:j.bounds[i][1]]
		} else {
			j.vals[i] = nil
		}
	}
	r.fields = j.vals
}

// parseObject parses one line. With first set it returns the keys in order; otherwise it
// fills j.store/j.bounds/j.present for the known columns.
func (j *jsonlReader) parseObject(line []byte, first bool) ([]string, int, error) {
	if len(line) == 0 || line[0] != '{' {
		return nil, 0, fmt.Errorf("not a JSON object (a JSON Lines input needs one object per line)")
	}
	dec := json.NewDecoder(bytes.NewReader(line))
	dec.UseNumber()
	if _, err := dec.Token(); err != nil {
		return nil, 0, fmt.Errorf("invalid JSON: %v", err)
	}
	var keys []string
	seen := map[string]bool{}
	if !first {
		if len(j.bounds) < len(j.cols) {
			j.bounds = make([][2]int, len(j.cols))
			j.present = make([]bool, len(j.cols))
		}
		for i := range j.present {
			j.present[i] = false
		}
		j.store = j.store[:0]
	}
	for dec.More() {
		tok, err := dec.Token()
		if err != nil {
			return nil, 0, fmt.Errorf("invalid JSON: %v", err)
		}
		key, ok := tok.(string)
		if !ok {
			return nil, 0, fmt.Errorf("invalid JSON: object key expected")
		}
		if seen[key] {
			return nil, 0, fmt.Errorf("key %q appears twice", key)
		}
		seen[key] = true
		var raw json.RawMessage
		if err := dec.Decode(&raw); err != nil {
			return nil, 0, fmt.Errorf("invalid JSON: %v", err)
		}
		if first {
			keys = append(keys, key)
			continue
		}
		ci, known := j.index[key]
		if !known {
			return nil, 0, fmt.Errorf("key %q is not a column (columns come from the first object)", key)
		}
		a := len(j.store)
		switch raw[0] {
		case 'n':
			continue // null: missing
		case '"':
			var s string
			if err := json.Unmarshal(raw, &s); err != nil {
				return nil, 0, fmt.Errorf("invalid JSON: %v", err)
			}
			j.store = append(j.store, s...)
		case '{', '[':
			var b bytes.Buffer
			json.Compact(&b, raw)
			j.store = append(j.store, b.Bytes()...)
		default: // number, true, false
			j.store = append(j.store, raw...)
		}
		j.bounds[ci] = [2]int{a, len(j.store)}
		j.present[ci] = true
	}
	if _, err := dec.Token(); err != nil {
		return nil, 0, fmt.Errorf("invalid JSON: %v", err)
	}
	if _, err := dec.Token(); err != io.EOF {
		return nil, 0, fmt.Errorf("invalid JSON: text after the object")
	}
	return keys, 0, nil
}
