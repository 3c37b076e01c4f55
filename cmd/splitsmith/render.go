package main

import (
	"encoding/csv"
	"encoding/json"
	"fmt"
	"io"
	"strconv"
	"strings"
	"unicode/utf8"
)

// table is rows of text cells with a header, printed aligned, as CSV, JSON or Markdown.
type table struct {
	Header []string
	Rows   [][]string
}

func (t *table) add(cells ...any) {
	row := make([]string, len(cells))
	for i, c := range cells {
		row[i] = cell(c)
	}
	t.Rows = append(t.Rows, row)
}

// cell renders one value: floats with the shortest exact form, NULL as "NULL".
func cell(v any) string {
	switch x := v.(type) {
	case nil:
		return "NULL"
	case string:
		return x
	case []byte:
		return string(x)
	case float64:
		return strconv.FormatFloat(x, 'g', -1, 64)
	case int64:
		return strconv.FormatInt(x, 10)
	case int:
		return strconv.Itoa(x)
	case bool:
		return strconv.FormatBool(x)
	}
	return fmt.Sprint(v)
}

func (t *table) write(w io.Writer, format string) error {
	switch format {
	case "csv":
		cw := csv.NewWriter(w)
		cw.Write(t.Header)
		cw.WriteAll(t.Rows)
		return cw.Error()
	case "json":
		out := make([]map[string]string, 0, len(t.Rows))
		for _, r := range t.Rows {
			m := map[string]string{}
			for i, h := range t.Header {
				m[h] = r[i]
			}
			out = append(out, m)
		}
		return writeJSON(w, out)
	case "markdown":
		fmt.Fprintf(w, "| %s |\n|%s\n", strings.Join(t.Header, " | "), strings.Repeat(" --- |", len(t.Header)))
		for _, r := range t.Rows {
			esc := make([]string, len(r))
			for i, c := range r {
				esc[i] = strings.ReplaceAll(c, "|", `\|`)
			}
			fmt.Fprintf(w, "| %s |\n", strings.Join(esc, " | "))
		}
		return nil
	}
	widths := make([]int, len(t.Header))
	for i, h := range t.Header {
		widths[i] = utf8.RuneCountInString(h)
	}
	for _, r := range t.Rows {
		for i, c := range r {
			if n := utf8.RuneCountInString(c); n > widths[i] {
				widths[i] = n
			}
		}
	}
	line := func(cells []string) {
		var b strings.Builder
		for i, c := range cells {
			if i > 0 {
				b.WriteString("  ")
			}
			b.WriteString(c)
			if i < len(cells)-1 {
				b.WriteString(strings.Repeat(" ", widths[i]-utf8.RuneCountInString(c)))
			}
		}
		fmt.Fprintln(w, b.String())
	}
	line(t.Header)
	for _, r := range t.Rows {
		line(r)
	}
	return nil
}

func writeJSON(w io.Writer, v any) error {
	enc := json.NewEncoder(w)
	enc.SetIndent("", "  ")
	return enc.Encode(v)
}
