// Package splits builds reproducible train/holdout splits and k folds of an ingested table,
// seals them with per-side digests, verifies them later, and exports one side.
//
// A split is stored as plain rows (ss_splits, ss_split_sides, ss_split_rows, ss_split_folds)
// and one plain-SQL view per side, so stock sqlite3 reads it. The side of a row is a pure
// function of its key (or its entity's key), the seed and the fractions (see hash.go for the
// hash specification, which the README states in full), so any engine can recompute it.
//
// Strategies: random (hash of the key), stratified (exact per-stratum quotas cut in hash
// order, or pure hash), grouped (union-find over one or more group columns; every row of an
// entity on one side), time-ordered (latest period held out, with gap, purge and a span
// policy for grouped time splits), k folds (hash, stratified round-robin, grouped balanced,
// or rolling-origin for time order) and adopted (an existing column or the input file).
//
// SQL surface (sql.go): split_key, split_hash_u, split_bucket, split_side, split_seal.
package splits
