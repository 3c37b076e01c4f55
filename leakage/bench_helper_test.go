package leakage

import (
	"flag"
	"strings"
	"syscall"
	"testing"
	"time"
)

// benchSelected reports whether -test.bench names this benchmark explicitly (not ".").
func benchSelected(name string) bool {
	f := flag.Lookup("test.bench")
	return f != nil && strings.Contains(f.Value.String(), name)
}

// cpuTime is the process's user+system CPU time so far.
func cpuTime() time.Duration {
	var ru syscall.Rusage
	if syscall.Getrusage(syscall.RUSAGE_SELF, &ru) != nil {
		return 0
	}
	return time.Duration(ru.Utime.Nano() + ru.Stime.Nano())
}

// cpuMeter reports CPU seconds per operation (user+system, all threads) beside wall time, so
// that figures taken on a loaded machine can still be compared: call it after ResetTimer and
// defer the function it returns.
func cpuMeter(b *testing.B) func() {
	start := cpuTime()
	return func() {
		b.ReportMetric((cpuTime()-start).Seconds()/float64(b.N), "cpu-s/op")
	}
}
