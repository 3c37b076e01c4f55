package ingest

import (
	"crypto/sha256"
	"encoding/binary"
	"fmt"
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

// Digester computes the content digest of one row at a time: values are encoded into one
// reused buffer and hashed with a single SHA-256 call per row.
// The zero value is not ready; use NewDigester.
type Digester struct {
	row []byte
}

// NewDigester returns a Digester.
func NewDigester() *Digester {
	return &Digester{row: make([]byte, 0, 256)}
}

// Reset starts a new row.
func (d *Digester) Reset() { d.row = d.row[:0] }

func (d *Digester) hdr(tag byte, n int) {
	d.row = append(d.row, tag, byte(n>>24), byte(n>>16), byte(n>>8), byte(n))
}

func (d *Digester) put(tag byte, b []byte) {
	d.hdr(tag, len(b))
	d.row = append(d.row, b...)
}

// Null adds a NULL value.
func (d *Digester) Null() { d.hdr(tagNull, 0) }

// Int adds an INTEGER value.
func (d *Digester) Int(v int64) {
	var buf [20]byte
	d.put(tagInteger, strconv.AppendInt(buf[:0], v, 10))
}

// Real adds a REAL value.
func (d *Digester) Real(v float64) {
	var buf [32]byte
	d.put(tagReal, strconv.AppendFloat(buf[:0], v, 'g', -1, 64))
}

// intText adds an INTEGER value given as its canonical decimal text (strictly inferred
// integers: -?(0|[1-9][0-9]*), never "-0").
func (d *Digester) intText(b []byte) { d.put(tagInteger, b) }

// realText adds a REAL value given as its canonical text (see realTextCanonical).
func (d *Digester) realText(b []byte) { d.put(tagReal, b) }

// Text adds a TEXT value.
func (d *Digester) Text(s string) {
	d.hdr(tagText, len(s))
	d.row = append(d.row, s...)
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
	sum := sha256.Sum256(d.row)
	return int64(binary.BigEndian.Uint64(sum[:8]))
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
