// Package ingest loads CSV, TSV and JSON Lines inputs into typed SQLite tables, and holds the
// row content digest, the column-additive normalised digest (normdigest.go), the
// data-quality profile and the demo data generator.
//
// # Reading
//
// CSV follows RFC 4180: fields may be quoted; a quote inside a quoted field is doubled; quoted
// fields may hold commas and line breaks (kept byte for byte, CRLF included); records end at
// CRLF or LF; a UTF-8 byte-order mark at the start is dropped; empty lines between records
// are skipped. A quote inside an unquoted field, text after a closing quote and a quoted
// field that never closes are bad quoting. TSV follows the IANA text/tab-separated-values
// registration: no quoting, one record per line, tab-separated. JSON Lines: one object per
// line; the first object's keys, in order, are the columns; later objects may omit keys (NULL)
// but not add any; strings are text, numbers their literal text (typed like CSV values), true
// and false the words, null missing, arrays and objects their compact JSON text. Every field
// must be valid UTF-8. Inputs ending in .gz (or starting with the gzip magic bytes) are
// decompressed on the fly.
//
// # One pass when the first rows settle the types, two otherwise; bounded memory
//
// Types are decided only after every value has been seen, yet a table's column types must be
// declared before its first row. Load first scans the first 10,000 records of the first
// input and fixes provisional types from them; it then creates the table and reads every
// input once, checking rows, inferring (every value still votes), converting, digesting and
// inserting. If a value changes any column's type decision (a "calm" among numbers, a first
// value in a column that was empty so far), the attempt is undone (the table dropped, or the
// appended rows and stored rejects deleted, inside the same transaction) and the load runs in
// two passes: pass 1 checks every row and infers, pass 2 converts and inserts. Result.Passes
// says which happened. Files are simply opened again for each pass (a changed size or time is
// an error); standard input, pipes and io.Reader inputs are first spooled to a temporary file, whose
// SHA-256 and size are taken while spooling. Readers work in a reused buffer of 1 MiB that
// grows only for a longer single record (up to 64 MiB), so memory does not grow with the
// input. Loading overlaps parsing (one goroutine) with SQLite's work: rows go out in
// multi-row INSERTs of about 150 rows through the driver's own statement interface, in the
// caller's one transaction.
//
// # Type inference (conservative)
//
// Missing tokens (the empty string and, by default, NA, N/A, null, NaN; exact, case-sensitive
// matches) are NULL and do not vote. A column gets a type only when every other value parses:
//
//	INTEGER    -?(0|[1-9][0-9]*) within int64 (leading-zero codes such as "00123" stay TEXT;
//	           an integer too large for int64 stays TEXT rather than lose digits as REAL)
//	REAL       integers and decimals with a fraction or exponent ("1.5", "-0.25", "2e-3",
//	           ".5"); not "5.", "+1", "1,5", inf or nan; finite
//	BOOLEAN    true or false in any case; never 0/1 or yes/no (those stay INTEGER or TEXT)
//	DATE       YYYY-MM-DD, a real calendar day
//	TIMESTAMP  YYYY-MM-DD, 'T' or space, hh:mm[:ss[.fraction]], optional Z or ±hh:mm/±hhmm;
//	           stored as RFC 3339 text ('T', seconds always, zone as given); a column mixing
//	           zoned and zone-less values stays TEXT
//	TEXT       everything else; values are kept exactly as read (no trimming)
//
// INTEGER is preferred over REAL when both fit. No value is trimmed before parsing. The
// reason for every column's type (all N values parse as X, or the first value that did not
// and where) is stored in ss_columns. Options.Schema (--schema) fixes a column's type; its
// parser is then lenient (leading zeros and '+' for INTEGER; yes/no, y/n, t/f, 1/0 for
// BOOLEAN) and a value that still does not parse is a bad row. An append uses the existing
// table's types the same way.
//
// # Bad rows
//
// Ragged rows, bad quoting, invalid UTF-8 and values breaking a given type are bad rows,
// located as FILE:LINE (the line where the record starts) with the column and value. An empty
// input, a header-only input, empty, duplicate (case-insensitive) or reserved header names,
// inputs whose columns differ, and a first JSON line that is not an object stop the load
// whatever Options.OnError says.
//
// # SQL
//
//	ingest_digest(v1, ..., vn)       the content digest stored in ss_digest
//	ingest_norm_digest(t1, ..., tn)  the normalised digest stored in ss_norm_digest, over
//	                                 normalised texts (Result.NormDigestCheckSQL writes them)
//	ingest_norm_term(pos, norm)      one column's term of that sum
//	ingest_infer_type(text)          the type a column holding only that value would get
//	ingest_norm(text)                text as ss_norm_digest normalises it (NormalizeText)
package ingest
