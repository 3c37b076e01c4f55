package leakage

import "testing"

// BenchmarkNearDuplicates1M: 1,000,000 short texts (target < 60 s on 2 cores). Its name
// does not match -bench . 's usual patterns by accident only: run it explicitly with
// -bench 'NearDuplicates1M'; it is skipped unless selected alone.
func BenchmarkNearDuplicates1M(b *testing.B) {
	if !benchSelected("NearDuplicates1M") {
		b.Skip("run explicitly: go test -run '^$' -bench NearDuplicates1M ./leakage/")
	}
	benchNearDup(b, 1_000_000)
}
