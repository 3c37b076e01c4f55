-- Profile: data-quality results of `splitsmith profile`, one set per table (a new profile of
-- the same table replaces the previous one in the same transaction).
-- Owned by the ingest package (profile.go); see DEVELOPERS.md "Tables".
CREATE TABLE ss_profiles (
  table_name       TEXT PRIMARY KEY,
  run_id           INTEGER NOT NULL REFERENCES ss_runs(run_id),
  rows             INTEGER NOT NULL,
  key_columns      TEXT NOT NULL DEFAULT '[]', -- JSON array of --key columns
  duplicate_rows   INTEGER NOT NULL,  -- rows whose ss_digest repeats an earlier row's (extra copies)
  duplicate_groups INTEGER NOT NULL,  -- distinct digests that occur more than once
  duplicate_keys   INTEGER,           -- rows in key groups of size > 1 (NULL without --key)
  rejected_rows    INTEGER NOT NULL,  -- ss_rejects rows of this table
  findings_error   INTEGER NOT NULL,
  findings_warn    INTEGER NOT NULL,
  findings_info    INTEGER NOT NULL
);

-- One row per user column. Statistic columns have no declared type so that each value keeps
-- its storage class: numbers as REAL, dates and timestamps as TEXT.
CREATE TABLE ss_profile_columns (
  table_name     TEXT NOT NULL,
  position       INTEGER NOT NULL,  -- as in ss_columns
  name           TEXT NOT NULL,
  logical_type   TEXT NOT NULL,     -- from ss_columns
  sql_type       TEXT NOT NULL,
  kind           TEXT NOT NULL,     -- what the values mostly are: number | date | timestamp | boolean | text | empty
  rows           INTEGER NOT NULL,
  missing        INTEGER NOT NULL,  -- NULL values
  distinct_values INTEGER NOT NULL, -- distinct non-NULL values
  conforming     INTEGER NOT NULL,  -- non-NULL values of the column's kind
  nonconforming  INTEGER NOT NULL,  -- non-NULL values of another kind ("7,4" in a number column)
  min_value, max_value,             -- over conforming values (numbers; dates as text)
  mean           REAL,              -- numbers only: corrected two-pass with compensated sums
  sd             REAL,              -- sample SD, denominator n-1
  p05, q1, median, q3, p95,         -- Hyndman-Fan type 7 (R's default); dates as text
  fence_low, fence_high,            -- Tukey's inner fences Q1 - 1.5 IQR, Q3 + 1.5 IQR
  outliers       INTEGER,           -- values outside the inner fences (NULL when not computed)
  far_outliers   INTEGER,           -- values outside the outer fences Q1 - 3 IQR, Q3 + 3 IQR
  top_values_json TEXT NOT NULL,    -- [{"value":..,"count":..}] the 5 most frequent values
  PRIMARY KEY (table_name, position)
);

CREATE TABLE ss_profile_findings (
  finding_id    INTEGER PRIMARY KEY,
  run_id        INTEGER NOT NULL REFERENCES ss_runs(run_id),
  table_name    TEXT NOT NULL,
  column_name   TEXT,              -- NULL for table-level findings
  check_name    TEXT NOT NULL,     -- duplicate_rows, duplicate_key, rejected_rows, type_conformity, ...
  severity      TEXT NOT NULL CHECK (severity IN ('info', 'warn', 'error')),
  count         INTEGER NOT NULL,  -- rows (or values) concerned
  message       TEXT NOT NULL,
  examples_json TEXT NOT NULL      -- [{"value":..,"count":..,"lines":[..],"rows":[..]}]
);
CREATE INDEX ss_profile_findings_table ON ss_profile_findings(table_name, severity);
