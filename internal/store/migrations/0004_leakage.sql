-- leakage tables: owned by the leakage package (see DEVELOPERS.md "Tables" and "leakage").
-- One ss_audits row per audit of a split; its findings in report order; the rows each
-- finding involves, per side. Stored SQL that recomputes them is in ss_audit_queries
-- (subject 'audit:<split>'), named by ss_findings.query_name.
CREATE TABLE ss_audits (
  audit_id     INTEGER PRIMARY KEY,
  run_id       INTEGER NOT NULL REFERENCES ss_runs(run_id),
  split_name   TEXT NOT NULL,
  table_name   TEXT NOT NULL,
  options_json TEXT NOT NULL,      -- resolved options: checks run and skipped (why), columns, parameters
  rows         INTEGER NOT NULL,   -- rows on a side of the split
  errors       INTEGER NOT NULL,
  warnings     INTEGER NOT NULL,
  infos        INTEGER NOT NULL
);

CREATE TABLE ss_findings (
  audit_id      INTEGER NOT NULL REFERENCES ss_audits(audit_id),
  seq           INTEGER NOT NULL,  -- 1.. in report order (check catalog order, then subject, then rows)
  check_name    TEXT NOT NULL,     -- a name from `splitsmith audit --list-checks`
  severity      TEXT NOT NULL CHECK (severity IN ('info', 'warn', 'error')),
  subject       TEXT NOT NULL,     -- what was examined: 'across sides', 'within holdout', a column
  item          TEXT,              -- which one: an entity value, a column's level; NULL otherwise
  side_a        TEXT,              -- first side involved (split order) and its row count
  rows_a        INTEGER NOT NULL DEFAULT 0,
  side_b        TEXT,              -- second side involved and its row count
  rows_b        INTEGER NOT NULL DEFAULT 0,
  score         REAL,              -- the check's measure (Jaccard, AUC, PSI, ...); NULL when none
  message       TEXT NOT NULL,
  evidence_json TEXT NOT NULL DEFAULT '{}',
  query_name    TEXT,              -- ss_audit_queries.name (subject 'audit:<split>') that recomputes it
  PRIMARY KEY (audit_id, seq)
);

CREATE TABLE ss_finding_rows (
  audit_id INTEGER NOT NULL,
  seq      INTEGER NOT NULL,
  side     TEXT NOT NULL,
  row_id   INTEGER NOT NULL,       -- T.ss_row
  PRIMARY KEY (audit_id, seq, side, row_id)
) WITHOUT ROWID;
