"""Reference predictions for tests/cli/predict_command_test.cpp.

Usage: statsmodels_predict.py DATA.csv ROWS.csv WEIGHTED(0|1) ALPHA
DATA.csv has columns id, a, b, d, g (levels p, q, r), noise, w and y; ROWS.csv has id, a, b, d,
g and w (any order, no y). The design is built by hand in numpy, in stepledger's column order and
names, with baseline level p:
    intercept, a, b, ld = ln(d), a2 = a^2, g=q, g=r, a:g=q, a:g=r
and fitted with statsmodels OLS, or WLS with precision weights w when WEIGHTED is 1. The new
rows are priced with get_prediction(X0, weights=w0).summary_frame(alpha) (w0 = 1 for OLS).
Prints JSON: names, params, and per new row mean, mean_se, mean_ci_lower, mean_ci_upper,
obs_ci_lower, obs_ci_upper.
"""
import csv
import json
import sys

import numpy as np
import statsmodels.api as sm


def design(rows):
    a = np.array([float(r["a"]) for r in rows])
    b = np.array([float(r["b"]) for r in rows])
    d = np.array([float(r["d"]) for r in rows])
    g = [r["g"] for r in rows]
    gq = np.array([1.0 if level == "q" else 0.0 for level in g])
    gr = np.array([1.0 if level == "r" else 0.0 for level in g])
    return np.column_stack([np.ones_like(a), a, b, np.log(d), a * a, gq, gr, a * gq, a * gr])


def read(path):
    with open(path, newline="") as handle:
        return list(csv.DictReader(handle))


def main(data_path, rows_path, weighted, alpha):
    data = read(data_path)
    rows = read(rows_path)
    x = design(data)
    y = np.array([float(r["y"]) for r in data])
    x0 = design(rows)
    if weighted:
        w = np.array([float(r["w"]) for r in data])
        fit = sm.WLS(y, x, weights=w).fit()
        w0 = np.array([float(r["w"]) for r in rows])
    else:
        fit = sm.OLS(y, x).fit()
        w0 = np.ones(len(rows))
    frame = fit.get_prediction(x0, weights=w0).summary_frame(alpha=alpha)
    result = {
        "source": "Debian python3-statsmodels %s %s get_prediction"
        % (sm.__version__, "WLS" if weighted else "OLS"),
        "names": ["intercept", "a", "b", "ld", "a2", "g=q", "g=r", "a:g=q", "a:g=r"],
        "params": [float(v) for v in fit.params],
    }
    for key in ["mean", "mean_se", "mean_ci_lower", "mean_ci_upper", "obs_ci_lower", "obs_ci_upper"]:
        result[key] = [float(v) for v in frame[key]]
    print(json.dumps(result))


if __name__ == "__main__":
    main(sys.argv[1], sys.argv[2], sys.argv[3] == "1", float(sys.argv[4]))
