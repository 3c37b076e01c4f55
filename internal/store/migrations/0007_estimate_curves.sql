-- estimate_curves tables: measured learning curves (estimate curve), owned by the estimate
-- package (see DEVELOPERS.md "Tables" and "estimate: learning curves").
-- One row per estimate curve run: what was measured on which split.
CREATE TABLE ss_est_curve_runs (
  run_id       INTEGER PRIMARY KEY REFERENCES ss_runs(run_id),
  split_name   TEXT NOT NULL,
  table_name   TEXT NOT NULL,
  label        TEXT NOT NULL,
  features_json TEXT NOT NULL,   -- the --features columns, as given
  encoded_json TEXT NOT NULL,    -- the model's input columns after encoding (one-hot levels, missing indicators)
  model        TEXT NOT NULL,    -- ridge | logistic | knn
  metric       TEXT NOT NULL,    -- mse | rmse | mae | error | logloss | auc (stored as 1 − AUC)
  train_sides  TEXT NOT NULL,    -- JSON array of side names
  holdout_sides TEXT NOT NULL,
  train_rows   INTEGER NOT NULL,
  holdout_rows INTEGER NOT NULL,
  repeats      INTEGER NOT NULL,
  seed         INTEGER NOT NULL,
  target       REAL,             -- --target, NULL when none
  at_n         REAL,             -- --at, NULL when none
  best_capacity REAL,            -- capacity with the smallest n* (NULL when none reaches the target)
  best_nstar   REAL,
  verdict      TEXT NOT NULL,    -- the planner's answer, with the caution
  caution      TEXT NOT NULL
);

-- Measured points: training and holdout error for every (capacity, size, repeat).
CREATE TABLE ss_est_curve_points (
  run_id      INTEGER NOT NULL REFERENCES ss_est_curve_runs(run_id),
  split_name  TEXT NOT NULL,
  model       TEXT NOT NULL,
  capacity    REAL NOT NULL,     -- polynomial degree (ridge, logistic) or k (knn: capacity 1/k)
  size        INTEGER NOT NULL,  -- training rows (the first `size` of the repeat's seeded permutation)
  repeat      INTEGER NOT NULL,  -- 1..repeats
  train_err   REAL NOT NULL,
  holdout_err REAL NOT NULL,
  metric      TEXT NOT NULL,
  PRIMARY KEY (run_id, capacity, size, repeat)
) WITHOUT ROWID;

-- Per capacity: the chosen curve family, its extrapolation and intervals.
CREATE TABLE ss_est_curve_fits (
  run_id        INTEGER NOT NULL REFERENCES ss_est_curve_runs(run_id),
  capacity      REAL NOT NULL,
  family        TEXT,              -- pow3 | pow2 | exp3 | log2; NULL when no family could be fitted
  params_json   TEXT,              -- the family's parameters in its order (pow3: a, b, c)
  backtest_err  REAL,              -- mean relative error predicting the held-out largest sizes
  aic           REAL,
  asymptote     REAL, asymptote_lo REAL, asymptote_hi REAL,
  nstar         REAL, nstar_lo REAL, nstar_hi REAL,  -- NULL: no target, or unbounded
  reachable     INTEGER,           -- 1 when the target lies above the asymptote's interval
  at_err        REAL, at_lo REAL, at_hi REAL,
  interval_method TEXT,            -- bca | percentile
  variance_limited INTEGER,        -- 1 when training error < half the holdout error at the largest size
  gap_exponent  REAL,              -- gap ≈ b·n^(−c): c
  verdict       TEXT NOT NULL,     -- this capacity's plain-sentence answer, or why it could not be fitted
  PRIMARY KEY (run_id, capacity)
) WITHOUT ROWID;
