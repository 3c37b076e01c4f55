package ingest

import (
	"bufio"
	"compress/gzip"
	"crypto/sha256"
	"encoding/hex"
	"errors"
	"fmt"
	"hash"
	"io"
	"os"
	"path/filepath"
	"strings"
	"time"
)

// Input is one input of a load.
type Input struct {
	Name   string    // as given on the command line; stored in ss_source ("-" for stdin)
	Path   string    // file to read; "" when Reader is set (or Name is the path)
	Reader io.Reader // read this instead of a file: it is spooled to a temporary file first
	Format string    // csv, tsv or jsonl; "" = Options.Format, then Name's extension
}

// Formats are the input formats Load reads.
var Formats = []string{"csv", "tsv", "jsonl"}

// UsageError marks a mistake in how Load was called (unknown format, unknown --schema column,
// conflicting options): the CLI maps it to exit status 2.
type UsageError struct{ Err error }

func (e *UsageError) Error() string { return e.Err.Error() }
func (e *UsageError) Unwrap() error { return e.Err }

func usagef(format string, a ...any) error { return &UsageError{Err: fmt.Errorf(format, a...)} }

// formatOf resolves an input's format: explicit, then the extension (after .gz).
func formatOf(in Input, def string) (string, error) {
	f := in.Format
	if f == "" {
		f = def
	}
	if f != "" {
		for _, ok := range Formats {
			if f == ok {
				return f, nil
			}
		}
		return "", usagef("unknown format %q (want csv, tsv or jsonl)", f)
	}
	name := strings.TrimSuffix(strings.ToLower(in.Name), ".gz")
	switch filepath.Ext(name) {
	case ".csv":
		return "csv", nil
	case ".tsv", ".tab":
		return "tsv", nil
	case ".jsonl", ".ndjson":
		return "jsonl", nil
	}
	if in.Name == "-" {
		return "", usagef("cannot tell the format of standard input: give --format csv, tsv or jsonl")
	}
	return "", usagef("%s: cannot tell the format from the extension (.csv, .tsv, .jsonl, optionally .gz): give --format", in.Name)
}

// source is an input being loaded: a file read twice (pass 1 infers, pass 2 loads).
type source struct {
	in       Input
	name     string
	format   string
	path     string // file to open on each pass (the input or its spool)
	spool    bool
	gz       bool
	size     int64
	sha256   string
	modTime  time.Time
	statSize int64 // a plain file's size when the load began

	rows, skipped, rejected int64
}

// prepare opens (or spools) the input and fixes its path, size, SHA-256 (for spools) and
// compression.
func (s *source) prepare(tempDir string) error {
	if s.in.Reader == nil && s.in.Name != "-" {
		path := s.in.Path
		if path == "" {
			path = s.in.Name
		}
		st, err := os.Stat(path)
		if err != nil {
			if errors.Is(err, os.ErrNotExist) {
				return fmt.Errorf("%s: no such file", s.name)
			}
			return fmt.Errorf("%s: %w", s.name, err)
		}
		if st.IsDir() {
			return fmt.Errorf("%s: is a directory", s.name)
		}
		if !st.Mode().IsRegular() {
			// A pipe or device (e.g. <(zcat log.csv.gz)) can be read only once: spool it.
			f, err := os.Open(path)
			if err != nil {
				return fmt.Errorf("%s: %w", s.name, err)
			}
			defer f.Close()
			s.in.Reader = f
		}
	}
	if s.in.Reader != nil || s.in.Name == "-" && s.in.Path == "" {
		r := s.in.Reader
		if r == nil {
			r = os.Stdin
		}
		f, err := os.CreateTemp(tempDir, "splitsmith-ingest-*")
		if err != nil {
			return fmt.Errorf("spool %s: %w", s.name, err)
		}
		h := sha256.New()
		n, err := io.Copy(f, io.TeeReader(r, h))
		if cerr := f.Close(); err == nil {
			err = cerr
		}
		s.path, s.spool = f.Name(), true
		if err != nil {
			return fmt.Errorf("spool %s: %w", s.name, err)
		}
		s.size, s.sha256 = n, hex.EncodeToString(h.Sum(nil))
	} else {
		s.path = s.in.Path
		if s.path == "" {
			s.path = s.in.Name
		}
		st, err := os.Stat(s.path)
		if err != nil {
			if errors.Is(err, os.ErrNotExist) {
				return fmt.Errorf("%s: no such file", s.name)
			}
			return fmt.Errorf("%s: %w", s.name, err)
		}
		if st.IsDir() {
			return fmt.Errorf("%s: is a directory", s.name)
		}
		s.modTime, s.statSize = st.ModTime(), st.Size()
	}
	f, err := os.Open(s.path)
	if err != nil {
		return fmt.Errorf("%s: %w", s.name, err)
	}
	defer f.Close()
	var magic [2]byte
	n, _ := io.ReadFull(f, magic[:])
	s.gz = n == 2 && magic[0] == 0x1f && magic[1] == 0x8b
	return nil
}

func (s *source) cleanup() {
	if s.spool {
		os.Remove(s.path)
	}
}

// open starts one pass over the input. With hashing set it computes size and SHA-256 of
// the bytes read (pass 1 of a plain file). count receives bytes read (before decompression).
func (s *source) open(hashing bool, count func(int64)) (recordReader, func() error, error) {
	f, err := os.Open(s.path)
	if err != nil {
		return nil, nil, fmt.Errorf("%s: %w", s.name, err)
	}
	var h hash.Hash
	if hashing && !s.spool {
		h = sha256.New()
	}
	cr := &countReader{r: f, h: h, count: count}
	var r io.Reader = cr
	var zr *gzip.Reader
	if s.gz {
		zr, err = gzip.NewReader(bufio.NewReaderSize(cr, 1<<16))
		if err != nil {
			f.Close()
			return nil, nil, fmt.Errorf("%s: gzip: %w", s.name, err)
		}
		r = zr
	}
	if s.gz {
		r = &errPrefix{r: r, prefix: "gzip: "}
	}
	var rr recordReader
	switch s.format {
	case "csv":
		rr = newCSVReader(r, ',', true)
	case "tsv":
		rr = newCSVReader(r, '\t', false)
	case "jsonl":
		rr = newJSONLReader(r)
	}
	done := func() error {
		if zr != nil {
			zr.Close()
		}
		f.Close()
		if h != nil {
			s.size = cr.n
			s.sha256 = hex.EncodeToString(h.Sum(nil))
		}
		return nil
	}
	return rr, done, nil
}

// unchanged reports whether a plain input file still has the size and time it had in pass 1.
func (s *source) unchanged() error {
	if s.spool {
		return nil
	}
	st, err := os.Stat(s.path)
	if err != nil {
		return fmt.Errorf("%s: %w", s.name, err)
	}
	if st.Size() != s.statSize || !st.ModTime().Equal(s.modTime) {
		return fmt.Errorf("%s: the file changed while it was being loaded", s.name)
	}
	return nil
}

type countReader struct {
	r       io.Reader
	h       hash.Hash
	n       int64
	pending int64
	count   func(int64)
}

func (c *countReader) Read(p []byte) (int, error) {
	n, err := c.r.Read(p)
	if n > 0 {
		if c.h != nil {
			c.h.Write(p[:n])
		}
		c.n += int64(n)
		c.pending += int64(n)
	}
	if c.count != nil && c.pending > 0 && (c.pending >= 4<<20 || err != nil) {
		c.count(c.pending)
		c.pending = 0
	}
	return n, err
}

type errPrefix struct {
	r      io.Reader
	prefix string
}

func (e *errPrefix) Read(p []byte) (int, error) {
	n, err := e.r.Read(p)
	if err != nil && err != io.EOF {
		err = fmt.Errorf("%s%w", e.prefix, err)
	}
	return n, err
}
