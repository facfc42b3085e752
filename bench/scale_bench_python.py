#!/usr/bin/python3
"""What a user would do instead of `stepledger fit`: read the CSV with pandas and solve the
least-squares problem with numpy, with standard errors from sigma^2 (X'X)^-1.

    scale_bench_python.py DATA.csv RESPONSE

Uses Debian's python3-pandas and python3-numpy. Prints one JSON object on stdout: the
number of rows, the intercept and coefficient estimates, their standard errors and the
seconds spent (end to end, including the imports), so that scale_bench.sh can time it beside
stepledger and check that both found the same coefficients.
"""

import json
import sys
import time

START = time.perf_counter()

import numpy  # noqa: E402  (timed: part of what the user waits for)
import pandas  # noqa: E402


def main() -> int:
    if len(sys.argv) != 3:
        print("usage: scale_bench_python.py DATA.csv RESPONSE", file=sys.stderr)
        return 2
    path, response = sys.argv[1], sys.argv[2]
    frame = pandas.read_csv(path, dtype="float64")
    predictors = [name for name in frame.columns if name != response]
    y = frame[response].to_numpy()
    x = numpy.column_stack([numpy.ones(len(frame))] + [frame[name].to_numpy() for name in predictors])
    n, k = x.shape
    estimates, rss_array, rank, _ = numpy.linalg.lstsq(x, y, rcond=None)
    if rank < k:
        print(f"design is rank deficient: rank {rank} < {k} columns", file=sys.stderr)
        return 3
    residuals = y - x @ estimates
    rss = float(residuals @ residuals)
    sigma2 = rss / (n - k)
    covariance = sigma2 * numpy.linalg.inv(x.T @ x)
    errors = numpy.sqrt(numpy.diag(covariance))
    names = ["intercept"] + predictors
    result = {
        "n": n,
        "rss": rss,
        "estimates": dict(zip(names, map(float, estimates))),
        "se": dict(zip(names, map(float, errors))),
        "seconds": time.perf_counter() - START,
    }
    json.dump(result, sys.stdout)
    sys.stdout.write("\n")
    return 0


if __name__ == "__main__":
    sys.exit(main())
