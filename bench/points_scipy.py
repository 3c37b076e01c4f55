"""Baseline for bench/estimate_points.sh: the same work as `splitsmith estimate points
--families pow3 --bootstrap B` done with scipy.optimize.curve_fit: fit a + b*n**-c to the
per-size means of a points file (weights 1/var(mean)), then refit it on B resamples of the
repeats within each size. Prints the best of 3 wall times in seconds."""
import csv, sys, time
import numpy as np
from scipy.optimize import curve_fit

def pow3(n, a, b, c):
    return a + b * n ** (-c)

def main(path, B):
    rows = list(csv.DictReader(open(path)))
    by = {}
    for r in rows:
        by.setdefault(float(r["n"]), []).append(float(r["error"]))
    ns = np.array(sorted(by))
    groups = [np.array(by[n]) for n in ns]
    rng = np.random.default_rng(1)

    def fit(gs, p0):
        m = np.array([g.mean() for g in gs])
        sd = np.array([max(g.std(ddof=1) / np.sqrt(len(g)), 1e-9) for g in gs])
        # method "lm" (MINPACK), unbounded: the fastest path curve_fit has
        p, _ = curve_fit(pow3, ns, m, p0=p0, sigma=sd, method="lm", maxfev=2000)
        return p

    best = float("inf")
    for _ in range(3):
        t = time.perf_counter()
        p = fit(groups, [0.5 * min(g.mean() for g in groups), 1.0, 0.5])
        for _ in range(B):
            try:  # draws whose refit fails are dropped, as splitsmith drops them
                fit([rng.choice(g, len(g)) for g in groups], p)
            except RuntimeError:
                pass
        best = min(best, time.perf_counter() - t)
    print(f"{best:.4f}")

main(sys.argv[1], int(sys.argv[2]))
