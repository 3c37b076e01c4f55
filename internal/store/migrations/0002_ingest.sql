-- Ingest: one row per input file loaded, per column chosen, per rejected row.
-- Owned by the ingest package; see DEVELOPERS.md "Tables".
CREATE TABLE ss_sources (
  source_id   INTEGER PRIMARY KEY,
  run_id      INTEGER NOT NULL REFERENCES ss_runs(run_id),
  table_name  TEXT NOT NULL,
  path        TEXT NOT NULL,      -- as given on the command line ('-' for stdin); the value of ss_source
  size        INTEGER NOT NULL,   -- bytes read (before decompression)
  sha256      TEXT NOT NULL,      -- of the bytes read
  format      TEXT NOT NULL,      -- csv | tsv | jsonl (with .gz noted in options_json)
  rows_loaded INTEGER NOT NULL,
  rows_skipped INTEGER NOT NULL,
  rows_rejected INTEGER NOT NULL,
  options_json TEXT NOT NULL
);

CREATE TABLE ss_columns (
  table_name   TEXT NOT NULL,
  position     INTEGER NOT NULL,  -- 1-based, in the table's column order (user columns only)
  name         TEXT NOT NULL,
  logical_type TEXT NOT NULL,     -- INTEGER | REAL | BOOLEAN | DATE | TIMESTAMP | TEXT
  sql_type     TEXT NOT NULL,     -- INTEGER | REAL | TEXT: how values are stored
  reason       TEXT NOT NULL,     -- why this type: "all 2000 non-missing values parse as INTEGER", "--schema", ...
  missing      INTEGER NOT NULL,  -- values that were missing tokens (stored as NULL)
  PRIMARY KEY (table_name, position)
);

CREATE TABLE ss_rejects (
  reject_id  INTEGER PRIMARY KEY,
  run_id     INTEGER NOT NULL REFERENCES ss_runs(run_id),
  table_name TEXT NOT NULL,
  source     TEXT NOT NULL,       -- input path as given
  line       INTEGER NOT NULL,
  column_name TEXT,               -- NULL when the whole row is bad (ragged, bad quoting)
  value      TEXT,
  reason     TEXT NOT NULL,
  raw        TEXT                 -- the raw record, when it could be read
);
