#!/usr/bin/env python3
"""select on a data frame from Python beside the same data written to CSV and selected from the file.

    PYTHONPATH=build/python python3 bench/python_bench.py [--rows 1000000] [--threads 2] [--work-dir DIR]

Each way runs in its own child process (so that each peak-memory figure is its own): the child
makes the same frame (y and x1..x19 from a known linear model, numpy seed 20261201), notes its
resident size, then either runs stepledger.select on the frame, or writes the frame to CSV with
pandas and runs stepledger.select on that file (the time includes the writing). Prints one
Markdown table: seconds, the ratio to the frame run (goal: CSV at least 2x the frame's time), the
frame's own bytes, the peak resident size during the run (VmHWM, reset once the frame is made) and its growth over the
resident size with the frame (goal: the frame's run adds only its bounded state, not a copy of
the rows; the CSV way adds pandas' writer).
"""

import argparse
import json
import os
import subprocess
import sys
import tempfile
import time

PLAN = {"response": "y", "terms": "all", "method": "stepwise", "criterion": "bic"}


def status_kib(key):
    with open("/proc/self/status") as status:
        for line in status:
            if line.startswith(key + ":"):
                return int(line.split()[1])
    return 0


def make_frame(rows):
    import numpy
    import pandas
    random = numpy.random.default_rng(20261201)
    columns = {f"x{i}": random.normal(size=rows) for i in range(1, 20)}
    y = 3.0 + sum((0.5 * i if i <= 10 else 0.0) * columns[f"x{i}"] for i in range(1, 20)) + random.normal(size=rows)
    return pandas.DataFrame({"y": y, **columns})


def child(way, rows, threads, work_dir):
    import stepledger
    frame = make_frame(rows)
    frame_bytes = int(frame.memory_usage(deep=True).sum())
    made_peak_kib = status_kib("VmHWM")  # making the frame (numpy temporaries, pandas' block copy)
    # Reset the peak to the resident size now (Linux clear_refs "5"), so that VmHWM is the run's.
    with open("/proc/self/clear_refs", "w") as clear:
        clear.write("5")
    base_kib = status_kib("VmRSS")
    started = time.perf_counter()
    if way == "frame":
        result = stepledger.select(frame, PLAN, threads=threads, work_dir=work_dir)
    else:
        path = os.path.join(work_dir, "bench.csv")
        frame.to_csv(path, index=False)
        written = time.perf_counter() - started
        result = stepledger.select(path, PLAN, threads=threads, work_dir=work_dir)
        os.remove(path)
    seconds = time.perf_counter() - started
    print(json.dumps({"way": way, "seconds": seconds, "frame_bytes": frame_bytes, "base_kib": base_kib,
                      "peak_kib": status_kib("VmHWM"), "made_peak_kib": made_peak_kib, "terms": result.terms,
                      "write_seconds": written if way == "csv" else 0.0,
                      "coefficients": [c["estimate"] for c in result.model["coefficients"]]}))


def main():
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--rows", type=int, default=1_000_000)
    parser.add_argument("--threads", type=int, default=2)
    parser.add_argument("--work-dir", default=tempfile.gettempdir())
    parser.add_argument("--child", choices=["frame", "csv"])
    args = parser.parse_args()
    if args.child:
        child(args.child, args.rows, args.threads, args.work_dir)
        return
    results = {}
    for way in ("frame", "csv"):
        output = subprocess.run([sys.executable, __file__, "--child", way, "--rows", str(args.rows), "--threads",
                                 str(args.threads), "--work-dir", args.work_dir], check=True, capture_output=True,
                                text=True).stdout
        results[way] = json.loads(output)
    frame, csv = results["frame"], results["csv"]
    assert frame["terms"] == csv["terms"], "the two ways chose different terms"
    worst = max(abs(a - b) / max(abs(a), abs(b), 1e-300) for a, b in zip(frame["coefficients"], csv["coefficients"]))
    mb = 1024.0
    print(f"{args.rows:,} rows x 20 float64 columns, stepwise BIC over 19 terms, --threads {args.threads}\n")
    print("| way | seconds | vs frame | frame itself | resident with the frame | peak during the run | run's growth |")
    print("| --- | --- | --- | --- | --- | --- | --- |")
    for way, name in (("frame", "`select(frame, plan)`"),
                      ("csv", f"`frame.to_csv` ({csv['write_seconds']:.2f} s) + `select(path, plan)`")):
        r = results[way]
        print(f"| {name} | {r['seconds']:.2f} | {r['seconds'] / frame['seconds']:.2f}x | "
              f"{r['frame_bytes'] / 1e6:.0f} MB | {r['base_kib'] / mb:.0f} MB | {r['peak_kib'] / mb:.0f} MB | "
              f"{(r['peak_kib'] - r['base_kib']) / mb:.0f} MB |")
    print(f"\nSame terms; largest relative difference of a coefficient: {worst:.1e}. "
          f"Goal: CSV way / frame way >= 2 (here {csv['seconds'] / frame['seconds']:.1f}).")


if __name__ == "__main__":
    main()
