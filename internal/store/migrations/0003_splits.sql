-- splits tables: owned by the splits package (see DEVELOPERS.md "Tables" and "splits").
-- A split is plain rows: its canonical spec, per-side counts and seal digests, per-row side
-- (and fold), per-fold counts. Views <split>_<side> (plain SQL) are listed in ss_objects.
CREATE TABLE ss_splits (
  split_name    TEXT PRIMARY KEY,
  table_name    TEXT NOT NULL,
  strategy      TEXT NOT NULL,   -- random | stratified | grouped | stratified-grouped | time | adopted
  spec_json     TEXT NOT NULL,   -- canonical spec (splits.Spec): fields in fixed order, defaults filled
  seed          INTEGER NOT NULL,-- the spec's seed (unsigned 64-bit stored as its two's complement)
  run_id        INTEGER NOT NULL REFERENCES ss_runs(run_id),
  table_rows    INTEGER NOT NULL,-- rows of the table when the split was made
  assigned_rows INTEGER NOT NULL,-- rows on a side
  dropped_rows  INTEGER NOT NULL,-- rows with side '' (gap, purge, span, time, after_until)
  group_columns TEXT NOT NULL DEFAULT '[]', -- JSON array (also in spec_json.group)
  time_column   TEXT,            -- also spec_json.time
  folds         INTEGER,         -- K, or NULL without folds
  fold_scheme   TEXT,            -- kfold | rolling | adopted | NULL
  table_seal    TEXT NOT NULL,   -- split_seal over every row's ss_digest at split time
  summary_json  TEXT NOT NULL    -- notes: NULL-group rows, spanning entities, stratum deviations
);

CREATE TABLE ss_split_sides (
  split_name      TEXT NOT NULL REFERENCES ss_splits(split_name),
  side            TEXT NOT NULL,
  position        INTEGER NOT NULL,   -- 1-based order of the spec (time order for time splits)
  role            TEXT NOT NULL CHECK (role IN ('train', 'holdout', 'other')),
  target_fraction REAL,               -- NULL for adopted splits
  rows            INTEGER NOT NULL,   -- assigned rows (dropped rows not counted)
  groups          INTEGER,            -- entities on this side (grouped splits), else NULL
  row_fraction    REAL NOT NULL,      -- rows / assigned rows of the split
  group_fraction  REAL,
  digest          TEXT NOT NULL,      -- split_seal(ss_digest) over the side's rows
  view_name       TEXT NOT NULL,      -- <split>_<side>
  time_min        TEXT,               -- time splits: earliest and latest time on the side
  time_max        TEXT,
  PRIMARY KEY (split_name, side)
);

CREATE TABLE ss_split_rows (
  split_name TEXT NOT NULL,
  row_id     INTEGER NOT NULL,        -- T.ss_row
  side       TEXT NOT NULL,           -- side name, '' when dropped
  fold       INTEGER,                 -- 1..K (the fold whose test part holds the row), NULL without folds
  train_from INTEGER,                 -- rolling folds: first fold whose training part holds the row
  reason     TEXT NOT NULL DEFAULT '',-- why dropped: gap | purge | span | time | after_until ('' when on a side)
  PRIMARY KEY (split_name, row_id)
) WITHOUT ROWID;

-- Per fold: kfold/adopted: test = rows with fold = k, train = the side's other folded rows;
-- rolling: test = fold = k, train = train_from <= k (train_from NULL: never trained on).
CREATE TABLE ss_split_folds (
  split_name  TEXT NOT NULL REFERENCES ss_splits(split_name),
  fold        INTEGER NOT NULL,
  train_rows  INTEGER NOT NULL,
  test_rows   INTEGER NOT NULL,
  train_groups INTEGER,
  test_groups  INTEGER,
  excluded_rows INTEGER NOT NULL,     -- rolling: earlier rows kept out of training by gap or purge
  PRIMARY KEY (split_name, fold)
);
