package leakage

import "splitsmith/ingest"

// The default exact-duplicate key (text normalised, REAL to ingest.NormDigits significant
// digits, INTEGER exact) over the feature columns is read from the table's stored normalised
// digest, ss_norm_digest (DEVELOPERS.md "Normalised digest"): the sum mod 2^64 of one term per
// user column, so the feature key is the stored digest minus the terms of the columns that
// are not features (label, entity, split keys, --ignore). The audit reads one integer and the
// few excluded columns instead of every feature value. Tables ingested before the digest
// existed have no ss_norm_digest and take the reading path.

// normDigestKeys, off in tests, makes the audit read and hash every feature value even when
// ss_norm_digest could serve, to cross-check the two paths.
var normDigestKeys = true

// normDigestServes reports whether the stored normalised digest gives key k's grouping.
func (a *audit) normDigestServes(k keySpec) bool {
	return normDigestKeys && a.hasNormDigest && !k.digest && k.normalize && k.realDig == ingest.NormDigits && k.intDig == 0 &&
		len(k.cols) == len(a.feature)
}

// excluded lists the user columns that are not features.
func (a *audit) excluded() []colInfo {
	in := map[string]bool{}
	for _, f := range a.feature {
		in[f] = true
	}
	var out []colInfo
	for _, c := range a.cols {
		if !in[c.Name] {
			out = append(out, c)
		}
	}
	return out
}

// normKeys is every row's feature key from ss_norm_digest: the stored digest minus the terms
// of the excluded columns (read with the rows; REAL ones in their rounded form).
func (a *audit) normKeys() []uint64 {
	out := make([]uint64, len(a.rowID))
	ex := a.excluded()
	cols := make([]*column, len(ex))
	for j, c := range ex {
		cols[j] = a.data[c.Name]
	}
	parallel(len(out), a.workers, func(lo, hi int) {
		var scratch []byte
		for i := lo; i < hi; i++ {
			h := uint64(a.normDigest[i])
			for j, c := range cols {
				pos := ex[j].Pos
				var v any
				switch {
				case c.null[i]:
				case c.SQLType == "TEXT":
					v = c.str[i]
				case c.SQLType == "INTEGER":
					v = c.ints[i]
				default: // rounded as read (SQLite deciding where Go could not)
					h -= ingest.NormTerm(pos, c.rounded[ingest.NormDigits][i], false)
					continue
				}
				t, sc, _ := ingest.ValueTerm(pos, c.SQLType, v, scratch) // always sure for NULL, text, integers
				scratch = sc
				h -= t
			}
			out[i] = h
		}
	})
	return out
}
