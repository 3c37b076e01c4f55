package leakage

import (
	"flag"
	"strings"
)

// benchSelected reports whether -test.bench names this benchmark explicitly (not ".").
func benchSelected(name string) bool {
	f := flag.Lookup("test.bench")
	return f != nil && strings.Contains(f.Value.String(), name)
}
