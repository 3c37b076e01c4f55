-- Core tool tables. Every name splitsmith owns starts with ss_ (tables, views it makes for
-- users excepted: those are listed in ss_objects). User tables never start with ss_.
CREATE TABLE ss_runs (
  run_id         INTEGER PRIMARY KEY,
  command        TEXT NOT NULL,
  args_json      TEXT NOT NULL,        -- argv after the program name, as a JSON array
  tool_version   TEXT NOT NULL,
  sqlite_version TEXT NOT NULL,
  inputs_json    TEXT NOT NULL DEFAULT '[]', -- [{"path":..,"size":..,"sha256":..}]
  detail_json    TEXT NOT NULL DEFAULT '{}', -- command-specific: resolved spec, seed, counts
  started_at     TEXT NOT NULL,        -- RFC 3339 UTC; SOURCE_DATE_EPOCH when set
  ended_at       TEXT,
  outcome        TEXT NOT NULL DEFAULT 'running' -- ok | findings (a failed run leaves no row)
);

-- SQL that recomputes a stored result. By convention each query returns no rows when the
-- stored result and the recomputation agree (an "empty means intact" check), unless kind says
-- otherwise ('report' queries return rows to read).
CREATE TABLE ss_audit_queries (
  query_id    INTEGER PRIMARY KEY,
  run_id      INTEGER NOT NULL REFERENCES ss_runs(run_id),
  subject     TEXT NOT NULL,           -- e.g. 'split:naive', 'audit:naive', 'ingest:pipes'
  name        TEXT NOT NULL,
  kind        TEXT NOT NULL DEFAULT 'check', -- check (empty result = agrees) | report
  description TEXT NOT NULL,
  sql         TEXT NOT NULL,
  needs_tool  INTEGER NOT NULL DEFAULT 0,    -- 1 when the SQL calls splitsmith functions
  UNIQUE (subject, name)
);

-- Objects splitsmith made in the user namespace (views per split side), so names never collide.
CREATE TABLE ss_objects (
  name    TEXT PRIMARY KEY,
  type    TEXT NOT NULL,   -- view
  owner   TEXT NOT NULL,   -- e.g. 'split:naive'
  run_id  INTEGER NOT NULL REFERENCES ss_runs(run_id)
);
