package ingest

import (
	"crypto/sha256"
	"encoding/binary"
	"fmt"
	"hash"
	"math"
	"strconv"
)

// Digest tags, one per stored storage class (see DEVELOPERS.md "Content digest").
const (
	tagNull    = 0x00
	tagInteger = 0x01
	tagReal    = 0x02
	tagText    = 0x03
)

// Digester computes the content digest of one row at a time without allocating per value.
// The zero value is not ready; use NewDigester.
type Digester struct {
	h   hash.Hash
	buf []byte
	sum []byte
}

// NewDigester returns a Digester.
func NewDigester() *Digester {
	return &Digester{h: sha256.New(), buf: make([]byte, 0, 64), sum: make([]byte, 0, 32)}
}

// Reset starts a new row.
func (d *Digester) Reset() { d.h.Reset() }

func (d *Digester) put(tag byte, b []byte) {
	var hdr [5]byte
	hdr[0] = tag
	binary.BigEndian.PutUint32(hdr[1:], uint32(len(b)))
	d.h.Write(hdr[:])
	d.h.Write(b)
}

// Null adds a NULL value.
func (d *Digester) Null() { d.put(tagNull, nil) }

// Int adds an INTEGER value.
func (d *Digester) Int(v int64) {
	d.buf = strconv.AppendInt(d.buf[:0], v, 10)
	d.put(tagInteger, d.buf)
}

// Real adds a REAL value.
func (d *Digester) Real(v float64) {
	d.buf = strconv.AppendFloat(d.buf[:0], v, 'g', -1, 64)
	d.put(tagReal, d.buf)
}

// realText adds a REAL value given as its canonical text (see realTextCanonical).
func (d *Digester) realText(b []byte) { d.put(tagReal, b) }

// Text adds a TEXT value.
func (d *Digester) Text(s string) {
	var hdr [5]byte
	hdr[0] = tagText
	binary.BigEndian.PutUint32(hdr[1:], uint32(len(s)))
	d.h.Write(hdr[:])
	if sw, ok := d.h.(interface{ WriteString(string) (int, error) }); ok {
		sw.WriteString(s)
	} else {
		d.h.Write([]byte(s))
	}
}

// Value adds a value as database/sql returns it: nil, int64, float64, string, []byte, bool.
func (d *Digester) Value(v any) error {
	switch x := v.(type) {
	case nil:
		d.Null()
	case int64:
		d.Int(x)
	case int:
		d.Int(int64(x))
	case bool:
		if x {
			d.Int(1)
		} else {
			d.Int(0)
		}
	case float64:
		if math.IsNaN(x) {
			d.Null() // SQLite stores NaN as NULL
		} else {
			d.Real(x)
		}
	case string:
		d.Text(x)
	case []byte:
		d.put(tagText, x)
	default:
		return fmt.Errorf("ingest: digest: unsupported value type %T", v)
	}
	return nil
}

// Sum returns the row's digest: the first 8 bytes of the SHA-256, big-endian, as int64.
func (d *Digester) Sum() int64 {
	d.sum = d.h.Sum(d.sum[:0])
	return int64(binary.BigEndian.Uint64(d.sum[:8]))
}

// Digest returns the content digest of one row's user values in column order.
func Digest(values ...any) (int64, error) {
	d := NewDigester()
	for _, v := range values {
		if err := d.Value(v); err != nil {
			return 0, err
		}
	}
	return d.Sum(), nil
}
