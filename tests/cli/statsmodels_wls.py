"""Reference weighted least squares for tests/cli/statsmodels_reference_test.cpp.

Usage: statsmodels_wls.py DATA.csv
The CSV has columns x1, x2, x3, g (levels a, b, c), w and y. The design is built by hand in
numpy, in stepledger's column order and names, with baseline level a:
    intercept, x1, x2, lx3 = ln(x3), g=b, g=c, x1:g=b, x1:g=c
and fitted with statsmodels WLS (weights w as precision weights). Prints JSON with the names,
params, bse, llf (which includes the 1/2 sum ln w term), rsquared, ssr and df_resid.
"""
import csv
import json
import sys

import numpy as np
import statsmodels.api as sm


def main(path):
    with open(path, newline="") as handle:
        rows = list(csv.DictReader(handle))
    x1 = np.array([float(r["x1"]) for r in rows])
    x2 = np.array([float(r["x2"]) for r in rows])
    x3 = np.array([float(r["x3"]) for r in rows])
    g = [r["g"] for r in rows]
    w = np.array([float(r["w"]) for r in rows])
    y = np.array([float(r["y"]) for r in rows])
    gb = np.array([1.0 if level == "b" else 0.0 for level in g])
    gc = np.array([1.0 if level == "c" else 0.0 for level in g])
    names = ["intercept", "x1", "x2", "lx3", "g=b", "g=c", "x1:g=b", "x1:g=c"]
    design = np.column_stack([np.ones_like(x1), x1, x2, np.log(x3), gb, gc, x1 * gb, x1 * gc])
    fit = sm.WLS(y, design, weights=w).fit()
    print(json.dumps({
        "source": "Debian python3-statsmodels %s WLS" % sm.__version__,
        "names": names,
        "params": [float(v) for v in fit.params],
        "bse": [float(v) for v in fit.bse],
        "llf": float(fit.llf),
        "rsquared": float(fit.rsquared),
        "ssr": float(fit.ssr),
        "df_resid": float(fit.df_resid),
    }))


if __name__ == "__main__":
    main(sys.argv[1])
