"""The estimate-sweep benchmark's baseline: scikit-learn's learning_curve over a
PolynomialFeatures + StandardScaler + Ridge pipeline, one call per degree (1-5), on the same
sizes, repeats and data shape as BenchmarkSweep_5Degrees8Sizes5Repeats100k: 100,000 training
rows with 3 features, 25,000 holdout rows, 8 sizes, 5 repeats (each repeat a seeded
permutation of the training rows whose first n rows are the size-n subset, as in splitsmith),
both cores (n_jobs=2). Prints the best of 3 wall-clock seconds for the whole sweep.
Usage: /usr/bin/python3 bench/sweep_sklearn.py SIZE,SIZE,...   (Debian python3-sklearn)"""
import sys, time
import numpy as np
from sklearn.model_selection import learning_curve
from sklearn.pipeline import make_pipeline
from sklearn.preprocessing import PolynomialFeatures, StandardScaler
from sklearn.linear_model import Ridge

sizes = [int(s) for s in sys.argv[1].split(",")]
rng = np.random.default_rng(1)
def data(n):
    X = rng.uniform(-1, 1, size=(n, 3))
    y = np.sin(2 * X[:, 0]) + X[:, 1] * X[:, 2] + 0.5 * X[:, 2] ** 2 + 0.3 * rng.normal(size=n)
    return X, y
Xt, yt = data(100000)
Xh, yh = data(25000)
X, y = np.vstack([Xt, Xh]), np.concatenate([yt, yh])
hold = np.arange(100000, 125000)
cv = [(np.random.default_rng(r).permutation(100000), hold) for r in range(5)]

def sweep():
    out = {}
    for d in range(1, 6):
        pipe = make_pipeline(PolynomialFeatures(d), StandardScaler(), Ridge(alpha=1e-8 * 100000))
        _, tr, te = learning_curve(pipe, X, y, train_sizes=sizes, cv=cv, shuffle=False,
                                   scoring="neg_mean_squared_error", n_jobs=2)
        out[d] = -te.mean(axis=1)
    return out

best = float("inf")
for _ in range(3):
    t0 = time.perf_counter()
    res = sweep()
    best = min(best, time.perf_counter() - t0)
print("sklearn holdout MSE at the largest size by degree:",
      " ".join(f"{d}:{res[d][-1]:.4f}" for d in res), file=sys.stderr)
print(f"{best:.3f}")
