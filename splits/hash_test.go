package splits

import (
	"encoding/hex"
	"testing"
)

// Reference values recomputed with Python's hashlib (Debian /usr/bin/python3), with:
//
//	import hashlib, struct
//	def u(key, seed):
//	    h = hashlib.sha256(struct.pack('>Q', seed % 2**64) + key).digest()
//	    return (struct.unpack('>Q', h[:8])[0] >> 11) / 2**53
//	def dk(d): return struct.pack('>q', d)            # a content digest as key bytes
//	def enc(tag, b): return bytes([tag]) + struct.pack('>I', len(b)) + b
//	def side(uu, fr):                                 # first side with u < running sum
//	    c = 0.0
//	    for i, f in enumerate(fr):
//	        c += f
//	        if i == len(fr)-1: c = 1.0
//	        if uu < c: return i
//	def seal(ds): return hashlib.sha256(b''.join(struct.pack('>q', d) for d in sorted(ds))).hexdigest()
//	for k, s in [(dk(0),1),(dk(-1),42),(dk(1854158007365103010),7),(enc(3,b'S-0042'),1),
//	             (enc(1,b'7')+enc(0,b''),2**64-1),(b'',0)]:
//	    print(k.hex(), s, repr(u(k,s)), side(u(k,s),[0.7,0.15,0.15]))
//	print(seal([2,1]), seal([]), seal([-5, 3, 3]))
func TestHashU_MatchesHashlib(t *testing.T) {
	tests := []struct {
		key  string // hex
		seed uint64
		u    float64
		side int // under 0.7, 0.15, 0.15
	}{
		{"0000000000000000", 1, 0.4696067278659356, 0},
		{"ffffffffffffffff", 42, 0.2741383680341273, 0},
		{"19bb4ae24a716da2", 7, 0.5959772761071336, 0},
		{"0300000006532d30303432", 1, 0.81194819484625, 1},
		{"0100000001370000000000", 18446744073709551615, 0.21858226547425963, 0},
		{"", 0, 0.6848974799809221, 0},
		{"19bb4ae24a716da2", 1, 0.5774933755932542, 0}, // also the split_hash_u doc example
	}
	cum := Cumulative([]float64{0.7, 0.15, 0.15})
	for _, tt := range tests {
		k, _ := hex.DecodeString(tt.key)
		if got := HashU(k, tt.seed); got != tt.u {
			t.Errorf("HashU(%s, %d) = %v, want %v (hashlib)", tt.key, tt.seed, got, tt.u)
		}
		if got := newHasher(tt.seed).u(k); got != tt.u {
			t.Errorf("hasher.u(%s, %d) = %v, want %v", tt.key, tt.seed, got, tt.u)
		}
		if got := SideIndex(tt.u, cum); got != tt.side {
			t.Errorf("SideIndex(%v) = %d, want %d", tt.u, got, tt.side)
		}
	}
	// The digest key form equals the 8 bytes of the digest.
	if got := newHasher(7).uDigest(1854158007365103010); got != 0.5959772761071336 {
		t.Errorf("uDigest = %v", got)
	}
	// Key encoding (content-digest form): enc(3, b'S-0042') and enc(1, b'7') + enc(0, b'').
	if k, _ := Key("S-0042"); hex.EncodeToString(k) != "0300000006532d30303432" {
		t.Errorf("Key(S-0042) = %x", k)
	}
	if k, _ := Key(int64(7), nil); hex.EncodeToString(k) != "0100000001370000000000" {
		t.Errorf("Key(7, NULL) = %x", k)
	}
}

func TestSeal_MatchesHashlib(t *testing.T) {
	tests := []struct {
		ds   []int64
		want string
	}{
		{[]int64{2, 1}, "8c7654ecfd7b0b623b803e2f4e02ad1cc84278efdfcd7c4c9208edd81f17e115"},
		{nil, "e3b0c44298fc1c149afbf4c8996fb92427ae41e4649b934ca495991b7852b855"}, // SHA-256 of nothing
		{[]int64{3, -5, 3}, "f1e01a0bb1c9265f1b6f80c0ff9e3441b53cae0b513ab5040e4fe15481a42ce9"},
	}
	for _, tt := range tests {
		if got := Seal(tt.ds); got != tt.want {
			t.Errorf("Seal(%v) = %s, want %s (hashlib)", tt.ds, got, tt.want)
		}
	}
	// Order independence.
	if Seal([]int64{1, 2, 3}) != Seal([]int64{3, 1, 2}) {
		t.Error("seal depends on order")
	}
}

func TestLargestRemainder(t *testing.T) {
	// 10 rows at 0.7/0.15/0.15: 7, 1.5, 1.5 → remainders tie, the earlier side gets the row.
	got := largestRemainder(10, []float64{0.7, 0.15, 0.15})
	if got[0] != 7 || got[1] != 2 || got[2] != 1 {
		t.Errorf("largestRemainder = %v", got)
	}
}
