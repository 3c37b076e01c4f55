-- estimate honesty flags, owned by the estimate package (see DEVELOPERS.md "estimate:
-- fitting and extrapolation"). NULL where not applicable (no asymptote, no target).
-- asymptote_identified: 0 when the data do not pin the asymptote down (its interval spans
--   more than a quarter of [0, level], or it lies below the level by more than twice the
--   measured fall); asymptote_lo_bound: 1 when asymptote_lo is the constraint a ≥ 0, not an
--   estimate; horizon_n: 1000 × the largest measured size; nstar_beyond_horizon: 1 when the
--   fitted curve reaches the target only beyond horizon_n (nstar keeps the fitted number).
ALTER TABLE ss_est_estimates ADD COLUMN asymptote_identified INTEGER;
ALTER TABLE ss_est_estimates ADD COLUMN asymptote_lo_bound INTEGER;
ALTER TABLE ss_est_estimates ADD COLUMN horizon_n REAL;
ALTER TABLE ss_est_estimates ADD COLUMN nstar_beyond_horizon INTEGER;
ALTER TABLE ss_est_curve_fits ADD COLUMN asymptote_identified INTEGER;
ALTER TABLE ss_est_curve_fits ADD COLUMN asymptote_lo_bound INTEGER;
ALTER TABLE ss_est_curve_fits ADD COLUMN horizon_n REAL;
ALTER TABLE ss_est_curve_fits ADD COLUMN nstar_beyond_horizon INTEGER;
