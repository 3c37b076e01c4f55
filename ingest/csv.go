package ingest

import (
	"bytes"
	"errors"
	"fmt"
	"io"
	"unicode/utf8"
)

// maxRecord bounds one record's size, so a runaway quoted field cannot take all memory.
const maxRecord = 64 << 20

// record is one input record. fields and raw alias the reader's buffer and stay valid only
// until the next call to next.
type record struct {
	line    int64    // line where the record starts (header = 1)
	fields  [][]byte // nil entry = absent (JSONL key not given)
	raw     []byte
	problem string // a row-level problem found while reading (bad quoting, ...), "" if none
	column  int    // 1-based column the problem concerns, 0 for the whole row
	value   string // the offending value, when there is one
}

// recordReader yields records one at a time with bounded memory.
type recordReader interface {
	// header returns the column names (CSV/TSV: the first record; JSONL: the first object's
	// keys, and that object is then the first record next returns).
	header() ([]string, int64, error)
	// next advances to the next record; false at the end. A returned error is fatal (I/O);
	// row-level problems are in rec().problem.
	next() (bool, error)
	rec() *record
}

// csvReader reads RFC 4180 CSV (quoted=true) or IANA TSV (quoted=false: no quoting, each
// line one record). Records end at LF or CRLF; a UTF-8 BOM at the start is dropped; empty
// lines between records are skipped.
type csvReader struct {
	r          io.Reader
	buf        []byte
	pos        int // start of unparsed data
	end        int // end of valid data
	eof        bool
	rerr       error
	comma      byte
	quoted     bool
	line       int64 // line of the next record's start
	spans      []span
	unq        []byte
	r0         record
	fields     [][]byte
	bomChecked bool
	noQuote    bool // the current record's first line has no quote character
}

type span struct {
	inUnq bool
	a, b  int
}

var errNeedMore = errors.New("need more")

// csvBufSize is the reader's initial buffer; tests shrink it to exercise refills.
var csvBufSize = 1 << 20

func newCSVReader(r io.Reader, comma byte, quoted bool) *csvReader {
	return &csvReader{r: r, buf: make([]byte, csvBufSize), comma: comma, quoted: quoted, line: 1}
}

func (c *csvReader) rec() *record { return &c.r0 }

// fill makes room and reads more data, keeping buf[keep:end].
func (c *csvReader) fill(keep int) error {
	if c.eof {
		return io.EOF
	}
	if keep > 0 {
		n := copy(c.buf, c.buf[keep:c.end])
		c.end = n
		c.pos -= keep
	}
	if c.end == len(c.buf) {
		if len(c.buf) >= maxRecord {
			return fmt.Errorf("line %d: record longer than %d MiB", c.line, maxRecord>>20)
		}
		nb := make([]byte, 2*len(c.buf))
		copy(nb, c.buf[:c.end])
		c.buf = nb
	}
	for {
		n, err := c.r.Read(c.buf[c.end:])
		c.end += n
		if err == io.EOF {
			c.eof = true
			return nil
		}
		if err != nil {
			return err
		}
		if n > 0 {
			return nil
		}
	}
}

func (c *csvReader) header() ([]string, int64, error) {
	ok, err := c.next()
	if err != nil {
		return nil, 0, err
	}
	if !ok {
		return nil, 0, errEmpty
	}
	r := &c.r0
	if r.problem != "" {
		return nil, r.line, fmt.Errorf("header: %s", r.problem)
	}
	names := make([]string, len(r.fields))
	for i, f := range r.fields {
		names[i] = string(f)
	}
	return names, r.line, nil
}

var errEmpty = errors.New("empty input: no header line")

func (c *csvReader) next() (bool, error) {
	for {
		if !c.bomChecked {
			if c.end-c.pos < 3 && !c.eof {
				if err := c.fill(c.pos); err != nil && err != io.EOF {
					return false, err
				}
				continue
			}
			c.bomChecked = true
			if bytes.HasPrefix(c.buf[c.pos:c.end], []byte("\xef\xbb\xbf")) {
				c.pos += 3
			}
		}
		// Skip empty lines.
		for c.pos < c.end {
			if c.buf[c.pos] == '\n' {
				c.pos++
				c.line++
			} else if c.buf[c.pos] == '\r' && c.pos+1 < c.end && c.buf[c.pos+1] == '\n' {
				c.pos += 2
				c.line++
			} else {
				break
			}
		}
		if c.pos == c.end || (c.buf[c.pos] == '\r' && c.pos+1 == c.end) {
			if c.eof {
				return false, nil
			}
			if err := c.fill(c.pos); err != nil && err != io.EOF {
				return false, err
			}
			continue
		}
		n, err := c.parse(c.pos)
		if err == errNeedMore {
			if err := c.fill(c.pos); err != nil {
				if err == io.EOF {
					// Cannot happen: parse only asks for more before EOF.
					return false, io.ErrUnexpectedEOF
				}
				return false, err
			}
			continue
		}
		if err != nil {
			return false, err
		}
		r := &c.r0
		r.raw = c.buf[c.pos:n]
		r.line = c.line
		if c.noQuote || !c.quoted {
			// one line: the record ends at its only newline (or at the end of the input)
			if len(r.raw) > 0 && r.raw[len(r.raw)-1] == '\n' {
				c.line++
			}
		} else {
			c.line += int64(bytes.Count(r.raw, []byte{'\n'}))
		}
		c.pos = n
		r.raw = bytes.TrimSuffix(bytes.TrimSuffix(r.raw, []byte{'\n'}), []byte{'\r'})
		c.fields = c.fields[:0]
		for _, s := range c.spans {
			if s.inUnq {
				c.fields = append(c.fields, c.unq[s.a:s.b])
			} else {
				c.fields = append(c.fields, c.buf[s.a:s.b])
			}
		}
		r.fields = c.fields
		if r.problem == "" && !utf8.Valid(r.raw) {
			for i, f := range r.fields {
				if !utf8.Valid(f) {
					r.problem = fmt.Sprintf("invalid UTF-8 at byte %d", invalidAt(f)+1)
					r.column = i + 1
					r.value = string(bytes.ToValidUTF8(f, []byte("\uFFFD")))
					break
				}
			}
		}
		return true, nil
	}
}

func invalidAt(b []byte) int {
	for i := 0; i < len(b); {
		r, n := utf8.DecodeRune(b[i:])
		if r == utf8.RuneError && n <= 1 {
			return i
		}
		i += n
	}
	return len(b)
}

// parse parses one record starting at p and returns the offset just past it (past its line
// terminator). It returns errNeedMore when the buffer ends before the record does and more
// input may follow.
func (c *csvReader) parse(p int) (int, error) {
	c.spans = c.spans[:0]
	c.unq = c.unq[:0]
	r := &c.r0
	r.problem, r.column, r.value = "", 0, ""
	buf := c.buf[:c.end]
	lineEnd := -1 // index of the next '\n' at or after p, or len(buf) if none
	findLineEnd := func(from int) {
		if i := bytes.IndexByte(buf[from:], '\n'); i >= 0 {
			lineEnd = from + i
		} else {
			lineEnd = len(buf)
		}
	}
	findLineEnd(p)
	// Most records hold no quote at all: then no field needs the bare-quote check.
	c.noQuote = c.quoted && bytes.IndexByte(buf[p:lineEnd], '"') < 0
	if (c.noQuote || !c.quoted) && (lineEnd < len(buf) || c.eof) {
		// Fast path: one line, no quotes; fields are short, so a byte loop beats a search
		// call per field.
		end := lineEnd
		if end > p && buf[end-1] == '\r' {
			end--
		}
		start := p
		for j := p; j < end; j++ {
			if buf[j] == c.comma {
				c.spans = append(c.spans, span{a: start, b: j})
				start = j + 1
			}
		}
		c.spans = append(c.spans, span{a: start, b: end})
		return min(lineEnd+1, len(buf)), nil
	}
	for {
		if c.quoted && p < len(buf) && buf[p] == '"' {
			// Quoted field (RFC 4180 §2.5–2.7).
			start := p + 1
			q := start
			inUnq := false
			ua := len(c.unq)
			for {
				i := bytes.IndexByte(buf[q:], '"')
				if i < 0 {
					if !c.eof {
						return 0, errNeedMore
					}
					// Unterminated: the record runs to the end of the input.
					r.problem = fmt.Sprintf("bad quoting: quoted field %d is never closed", len(c.spans)+1)
					r.column = len(c.spans) + 1
					c.spans = append(c.spans, span{a: start, b: len(buf)})
					return len(buf), nil
				}
				q += i
				if q+1 == len(buf) && !c.eof {
					return 0, errNeedMore
				}
				if q+1 < len(buf) && buf[q+1] == '"' {
					if !inUnq {
						inUnq = true
					}
					c.unq = append(c.unq, buf[start:q+1]...)
					start = q + 2
					q = start
					continue
				}
				break
			}
			if inUnq {
				c.unq = append(c.unq, buf[start:q]...)
				c.spans = append(c.spans, span{inUnq: true, a: ua, b: len(c.unq)})
			} else {
				c.spans = append(c.spans, span{a: start, b: q})
			}
			p = q + 1
			if p > lineEnd {
				findLineEnd(p)
			}
			if p == len(buf) {
				return p, nil // c.eof is set: last record without a newline
			}
			switch buf[p] {
			case c.comma:
				p++
				continue
			case '\n':
				return p + 1, nil
			case '\r':
				if p+1 == len(buf) && !c.eof {
					return 0, errNeedMore
				}
				if p+1 == len(buf) || buf[p+1] == '\n' {
					return min(p+2, len(buf)), nil
				}
			}
			r.problem = fmt.Sprintf("bad quoting: unexpected %q after the closing quote of field %d", buf[p], len(c.spans))
			r.column = len(c.spans)
			if lineEnd == len(buf) && !c.eof {
				return 0, errNeedMore
			}
			return min(lineEnd+1, len(buf)), nil
		}
		if lineEnd == len(buf) && !c.eof {
			return 0, errNeedMore
		}
		line := buf[p:lineEnd]
		i := bytes.IndexByte(line, c.comma)
		if i < 0 {
			f := line
			if len(f) > 0 && f[len(f)-1] == '\r' {
				f = f[:len(f)-1]
			}
			c.addUnquoted(p, p+len(f))
			return min(lineEnd+1, len(buf)), nil
		}
		c.addUnquoted(p, p+i)
		p += i + 1
	}
}

func (c *csvReader) addUnquoted(a, b int) {
	if c.quoted && !c.noQuote && c.r0.problem == "" {
		if j := bytes.IndexByte(c.buf[a:b], '"'); j >= 0 {
			c.r0.problem = fmt.Sprintf("bad quoting: quote inside unquoted field %d", len(c.spans)+1)
			c.r0.column = len(c.spans) + 1
			c.r0.value = clip(string(c.buf[a:b]))
		}
	}
	c.spans = append(c.spans, span{a: a, b: b})
}
