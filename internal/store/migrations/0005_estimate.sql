-- estimate tables for `estimate points` and `estimate formula` (owned by the estimate package;
-- the measured learning curves of `estimate curve` are in 0007_estimate_curves.sql).
-- Non-finite values are stored as NULL: an n* or interval end of NULL means "unbounded" (the
-- target is not reached), see the reachable column.

-- The (n, error) points a run fitted, as read, so SQL can recompute the fits.
CREATE TABLE ss_est_points (
  run_id   INTEGER NOT NULL REFERENCES ss_runs(run_id),
  subject  TEXT NOT NULL,        -- 'points:' || the --points path
  kind     TEXT NOT NULL,        -- holdout | train (the optional training-error column)
  line     INTEGER NOT NULL,     -- line of the points file (header = 1)
  n        REAL NOT NULL,
  err      REAL NOT NULL,
  rep      INTEGER NOT NULL,     -- the repeat column (0 when absent)
  PRIMARY KEY (run_id, subject, kind, line)
);

-- Every curve family fitted, with its parameters, standard errors, AIC and backtest error.
CREATE TABLE ss_est_fits (
  run_id       INTEGER NOT NULL REFERENCES ss_runs(run_id),
  subject      TEXT NOT NULL,
  family       TEXT NOT NULL,    -- pow3 | pow2 | exp3 | log2
  params_json  TEXT NOT NULL,    -- JSON object, parameter name → value (null if the fit failed)
  stderr_json  TEXT NOT NULL,    -- JSON object, parameter name → sqrt(diag(s²(JᵀJ)⁻¹))
  rss          REAL,             -- weighted residual sum of squares over the per-size means
  aic          REAL,
  backtest_err REAL,             -- mean relative error predicting the held-out largest sizes
  chosen       INTEGER NOT NULL, -- 1 for the family the extrapolation uses
  PRIMARY KEY (run_id, subject, family)
);

-- The extrapolation: asymptote, n* for the target and error at the planned n, with intervals.
CREATE TABLE ss_est_estimates (
  run_id          INTEGER NOT NULL REFERENCES ss_runs(run_id),
  subject         TEXT NOT NULL,
  family          TEXT NOT NULL,
  sizes           INTEGER NOT NULL,
  points          INTEGER NOT NULL,
  level           REAL NOT NULL,   -- confidence level of every interval
  bootstrap       INTEGER NOT NULL,-- bootstrap refits used
  seed            INTEGER NOT NULL,
  asymptote       REAL,            -- NULL for families without one (pow2: 0, log2: none)
  asymptote_lo    REAL,
  asymptote_hi    REAL,
  asymptote_method TEXT NOT NULL,  -- bca | percentile | none
  target          REAL,            -- NULL when no --target
  nstar           REAL,            -- NULL when no target or not reached
  nstar_lo        REAL,
  nstar_hi        REAL,            -- NULL = unbounded
  nstar_method    TEXT,
  reachable       INTEGER,         -- 1, 0, or NULL when no target
  at_n            REAL,            -- NULL when no --at
  at_err          REAL,
  at_lo           REAL,
  at_hi           REAL,
  at_method       TEXT,
  train_ratio     REAL,            -- training/holdout error at the largest size, NULL without training points
  variance_limited INTEGER,
  verdict         TEXT NOT NULL,   -- the planner's answer, caution included
  PRIMARY KEY (run_id, subject)
);

-- `estimate formula`: each closed-form criterion's n.
CREATE TABLE ss_est_criteria (
  run_id      INTEGER NOT NULL REFERENCES ss_runs(run_id),
  outcome     TEXT NOT NULL,     -- binary | continuous
  criterion   TEXT NOT NULL,     -- shrinkage | optimism | overall_risk | residual_sd | intercept
  n           INTEGER NOT NULL,
  value       REAL NOT NULL,     -- the criterion's own figure (shrinkage, margin, MMOE)
  binds       INTEGER NOT NULL,  -- 1 for the criterion that gives the largest n
  inputs_json TEXT NOT NULL,     -- the inputs: params, r2cs/prevalence or r2/mean/sd, shrinkage
  caution     TEXT NOT NULL,
  PRIMARY KEY (run_id, criterion)
);
