package ingest

import "testing"

// Reference digests recomputed with Python's hashlib (Debian python3), e.g.
//
//	import hashlib, struct
//	def enc(tag, b): return bytes([tag]) + struct.pack('>I', len(b)) + b
//	h = hashlib.sha256(enc(1, b'42') + enc(3, 'río'.encode()) + enc(0, b'') + enc(2, b'0.1')).digest()
//	struct.unpack('>q', h[:8])[0]
func TestDigest_MatchesHashlib(t *testing.T) {
	tests := []struct {
		name   string
		values []any
		want   int64
	}{
		{"mixed", []any{int64(42), "río", nil, 0.1}, digestMixed},
		{"empty row", nil, digestEmpty},
		{"one text", []any{"abc"}, digestABC},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			got, err := Digest(tt.values...)
			if err != nil {
				t.Fatal(err)
			}
			if got != tt.want {
				t.Errorf("Digest = %d, want %d", got, tt.want)
			}
		})
	}
}

// Values from the Python snippet above (hashlib.sha256, struct '>q').
const (
	digestMixed = 1854158007365103010
	digestEmpty = -2039914840885289964
	digestABC   = 676040571582008822
)
