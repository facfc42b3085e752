#!/usr/bin/env python3
"""Cluster runs: `mpirun -np K stepledger select ...` for K = 1, 2, 3 against the plain run.

Usage: mpi_ranks_test.py STEPLEDGER MPI_BUILT(ON|OFF) WORK_DIR

Checks, on invented data whose true model the test knows (y = 3 + 2 x1 - x2 + 0.5 x3 + grade
effects + noise; x4 and x5 carry no signal):
  - one file, criterion cv, with a holdout, every record holding a quoted note
    with line ends inside (so the guessed cuts between ranks fall inside quoted fields and the
    ranks must read again from the true boundary);
  - the same rows as a set of three files, one of them holding two records (smaller than the
    rank count), criterion bic with folds, holdout and bootstrap;
  - a file of two records under three ranks;
  - a non-finite number in the last rank's range: exit 2, its file:line:column on stderr, no
    output folder.
Same for every K: the fingerprint, the route, the final model, the k-fold and holdout errors
(1e-12 relative, common practice for results that differ only by the order of the factor merges),
the bootstrap's inclusion frequencies and model counts (exactly: they depend on the record index
only). Exit 77 (ctest: skipped) only when the program was built without Open MPI or mpirun is
missing.
"""
import json
import os
import random
import shutil
import subprocess
import sys

SKIP = 77


def fail(message):
    print("FAIL: " + message)
    sys.exit(1)


def write_rows(path, header, rows):
    with open(path, "w", newline="") as out:
        out.write(",".join(header) + "\n")
        for row in rows:
            out.write(",".join(row) + "\n")


def make_rows(count, seed):
    rng = random.Random(seed)
    rows = []
    for i in range(count):
        x = [rng.uniform(0, 10) for _ in range(5)]
        grade = rng.choice(["A", "B", "C"])
        effect = {"A": 1.5, "B": 0.0, "C": -1.0}[grade]
        y = 3 + 2 * x[0] - x[1] + 0.5 * x[2] + effect + rng.gauss(0, 1)
        # A note with commas, doubled quotes and line ends inside its quotes.
        note = '"refurbished unit %d, ""as new""\nkeyboard checked\nscreen %s"' % (i, rng.choice(["ok", "light marks"]))
        rows.append(["%.6f" % y] + ["%.6f" % v for v in x] + [grade, note])
    return rows


HEADER = ["y", "x1", "x2", "x3", "x4", "x5", "grade", "note"]


def plan(criterion):
    return {
        "response": "y",
        "terms": [{"name": "x%d" % j, "column": "x%d" % j} for j in range(1, 6)] +
                 [{"name": "grade", "categorical": "grade", "baseline": "B"}],
        "method": "stepwise",
        "criterion": criterion,
        "folds": 5,
        "seed": 20261203,
        "holdout": {"fraction": 0.2, "seed": 7},
        # The bootstrap's selections take a criterion other than cv (a plan rule).
        "bootstrap": None if criterion == "cv" else {"replicates": 25, "seed": 11},
    }


# Open MPI's shared-memory transport copies between processes with Linux CMA, which a container
# without the ptrace capability refuses (CI runs in one): plain copies through shared memory instead.
MPI_ENV = dict(os.environ, OMPI_MCA_btl_vader_single_copy_mechanism="none")


def run(cmd):
    return subprocess.run(cmd, capture_output=True, text=True, timeout=600, env=MPI_ENV)


def close(a, b, path, problems, rel=1e-12):
    if isinstance(a, dict):
        if set(a) != set(b):
            problems.append("%s: keys differ: %s" % (path, sorted(set(a) ^ set(b))))
            return
        for key in a:
            close(a[key], b[key], path + "." + key, problems, rel)
    elif isinstance(a, list):
        if len(a) != len(b):
            problems.append("%s: %d vs %d entries" % (path, len(a), len(b)))
            return
        for i, (x, y) in enumerate(zip(a, b)):
            close(x, y, "%s[%d]" % (path, i), problems, rel)
    elif isinstance(a, float) and isinstance(b, (int, float)) and not isinstance(a, bool):
        if abs(a - b) > rel * max(abs(a), abs(b)):
            problems.append("%s: %r vs %r" % (path, a, b))
    elif a != b:
        problems.append("%s: %r vs %r" % (path, a, b))


def route(audit):
    return [(s["index"], s["action"], s.get("term"), s.get("rule")) for s in audit["steps"]]


def compare(base, other, label):
    problems = []
    if base["data"]["sha256"] != other["data"]["sha256"]:
        problems.append("fingerprint differs")
    for key in ("rows_read", "rows_used", "rows_held_out", "rows_dropped", "files"):
        if base["data"].get(key) != other["data"].get(key):
            problems.append("data.%s differs" % key)
    if route(base) != route(other):
        problems.append("route differs: %s vs %s" % (route(base), route(other)))
    for a, b in zip(base["steps"], other["steps"]):
        close(a.get("criterion_value"), b.get("criterion_value"), "steps[%d].criterion_value" % a["index"], problems)
    model_a = dict(base["model"])
    model_b = dict(other["model"])
    # The size of the refinement's last correction is rounding itself (about 1e-15).
    model_a.pop("refinement_correction", None)
    model_b.pop("refinement_correction", None)
    close(model_a, model_b, "model", problems)
    # The prediction support comes from the diagnostics, computed where the rows lie: the term
    # ranges exactly (they are data values), the largest leverage to 1e-12 and its line exactly.
    support_a, support_b = base.get("prediction", {}), other.get("prediction", {})
    if support_a.get("ranges") != support_b.get("ranges"):
        problems.append("prediction.ranges differ: %s vs %s" % (support_a.get("ranges"), support_b.get("ranges")))
    for key in ("max_unit_leverage_line", "max_unit_leverage_file", "columns"):
        if support_a.get(key) != support_b.get(key):
            problems.append("prediction.%s differs: %r vs %r" % (key, support_a.get(key), support_b.get(key)))
    close(support_a.get("max_unit_leverage"), support_b.get("max_unit_leverage"), "prediction.max_unit_leverage",
          problems)
    validation_a = base["validation"]
    validation_b = other["validation"]
    close(validation_a["folds"], validation_b["folds"], "validation.folds", problems)
    close(validation_a["holdout"], validation_b["holdout"], "validation.holdout", problems)
    boot_a = validation_a.get("bootstrap")
    boot_b = validation_b.get("bootstrap")
    if (boot_a is None) != (boot_b is None):
        problems.append("bootstrap present in one run only")
    for key in ("inclusion", "sizes", "models") if boot_a and boot_b else ():
        if boot_a[key] != boot_b[key]:
            problems.append("bootstrap %s differ: %s vs %s" % (key, boot_a[key], boot_b[key]))
    if problems:
        fail(label + ":\n  " + "\n  ".join(problems[:20]))
    print("ok: " + label)


def main():
    if len(sys.argv) != 4:
        fail("usage: mpi_ranks_test.py STEPLEDGER MPI_BUILT WORK_DIR")
    program, mpi_built, work = sys.argv[1], sys.argv[2], sys.argv[3]
    if mpi_built != "ON":
        print("skipped: this build has no cluster runs (STEPLEDGER_WITH_MPI off or Open MPI not found)")
        return SKIP
    mpirun = shutil.which("mpirun")
    if mpirun is None:
        print("skipped: mpirun is not installed (Debian: openmpi-bin)")
        return SKIP
    shutil.rmtree(work, ignore_errors=True)
    os.makedirs(work)
    # Unbound, so that every process may run the two threads each run is given (by default
    # mpirun binds a process to one core, which would make --threads' default 1 there and 2 in
    # the plain run: other rounding).
    launcher = [mpirun, "--oversubscribe", "--allow-run-as-root", "--bind-to", "none", "-np"]

    rows = make_rows(900, 20261203)
    single = os.path.join(work, "listings.csv")
    write_rows(single, HEADER, rows)
    folder = os.path.join(work, "set")
    os.makedirs(folder)
    write_rows(os.path.join(folder, "part-1.csv"), HEADER, rows[:500])
    write_rows(os.path.join(folder, "part-2.csv"), HEADER, rows[500:502])
    write_rows(os.path.join(folder, "part-3.csv"), HEADER, rows[502:])
    tiny = os.path.join(work, "tiny.csv")
    write_rows(tiny, HEADER, rows[:2])
    for name, criterion in (("cv", "cv"), ("bic", "bic")):
        with open(os.path.join(work, "plan-%s.json" % name), "w") as out:
            json.dump(plan(criterion), out)

    cases = [("one file, criterion cv", single, "plan-cv.json"),
             ("three-file set, criterion bic", folder, "plan-bic.json")]
    for label, data, plan_name in cases:
        plan_path = os.path.join(work, plan_name)
        base_dir = os.path.join(work, "plain-" + plan_name)
        plain = run([program, "select", data, "--plan", plan_path, "--out", base_dir, "--quiet", "--threads", "2"])
        if plain.returncode != 0:
            fail("plain run of %s: exit %d: %s" % (label, plain.returncode, plain.stderr))
        with open(os.path.join(base_dir, "audit.json")) as handle:
            base = json.load(handle)
        for ranks in (1, 2, 3):
            out_dir = os.path.join(work, "ranks%d-%s" % (ranks, plan_name))
            shared = run(launcher + [str(ranks), program, "select", data, "--plan", plan_path, "--out", out_dir,
                                     "--quiet", "--threads", "2"])
            if shared.returncode != 0:
                fail("%s under %d ranks: exit %d: %s" % (label, ranks, shared.returncode, shared.stderr))
            if ranks == 1 and plain.stdout.replace(base_dir, "OUT") != shared.stdout.replace(out_dir, "OUT"):
                fail("%s under 1 rank prints otherwise than the plain run" % label)
            with open(os.path.join(out_dir, "audit.json")) as handle:
                audit = json.load(handle)
            cluster = audit.get("cluster", {})
            if (ranks > 1 and cluster.get("processes") != ranks) or (ranks == 1 and "cluster" in audit):
                fail("%s under %d ranks: the audit's cluster section is %r" % (label, ranks, cluster))
            verified = run([program, "verify", os.path.join(out_dir, "audit.json"), "--data", data])
            if verified.returncode != 0:
                fail("%s under %d ranks: verify --data of its audit: exit %d: %s%s" %
                     (label, ranks, verified.returncode, verified.stdout, verified.stderr))
            compare(base, audit, "%s, %d rank(s)" % (label, ranks))
            # verify --data shares its replay among the ranks too: the same verdict and text.
            if ranks > 1:
                base_audit = os.path.join(base_dir, "audit.json")
                alone = run([program, "verify", base_audit, "--data", data, "--threads", "2"])
                spread = run(launcher + [str(ranks), program, "verify", base_audit, "--data", data, "--threads", "2"])
                if spread.returncode != 0 or spread.stdout != alone.stdout:
                    fail("%s: verify --data under %d ranks: exit %d, text %s (plain: exit %d, %s) %s" %
                         (label, ranks, spread.returncode, spread.stdout, alone.returncode, alone.stdout,
                          spread.stderr))
        print("ok: %s, verify --data under 2 and 3 ranks" % label)

    # rerun shares its replay: the recorded plan of the set's audit on the single file under 2 ranks
    # gives the plain rerun's new audit (route, model, folds, holdout, bootstrap) and comparison.
    parent = os.path.join(work, "plain-plan-bic.json", "audit.json")
    plain_rerun_dir = os.path.join(work, "rerun-plain")
    shared_rerun_dir = os.path.join(work, "rerun-ranks2")
    plain = run([program, "rerun", parent, single, "--out", plain_rerun_dir, "--quiet", "--threads", "2"])
    shared = run(launcher + ["2", program, "rerun", parent, single, "--out", shared_rerun_dir, "--quiet",
                             "--threads", "2"])
    if plain.returncode != 0 or shared.returncode != 0:
        fail("rerun: plain exit %d, 2 ranks exit %d: %s %s" % (plain.returncode, shared.returncode, plain.stderr,
                                                             shared.stderr))
    with open(os.path.join(plain_rerun_dir, "audit.json")) as handle:
        rerun_base = json.load(handle)
    with open(os.path.join(shared_rerun_dir, "audit.json")) as handle:
        rerun_shared = json.load(handle)
    if rerun_shared.get("cluster", {}).get("processes") != 2:
        fail("rerun under 2 ranks: the new audit's cluster section is %r" % rerun_shared.get("cluster"))
    compare(rerun_base, rerun_shared, "rerun of the set's plan on one file, 2 ranks")
    problems = []
    close(rerun_base["comparison"], rerun_shared["comparison"], "comparison", problems)
    if problems:
        fail("rerun under 2 ranks: the comparison differs: " + "; ".join(problems[:10]))

    # Two records under three ranks: the same outcome as the plain run (here exit status and text).
    tiny_plan = os.path.join(work, "plan-tiny.json")
    with open(tiny_plan, "w") as out:
        json.dump({"response": "y", "terms": [{"name": "x1", "column": "x1"}], "method": "none"}, out)
    plain = run([program, "fit", tiny, "--plan", tiny_plan, "--json", "--threads", "2"])
    shared = run(launcher + ["3", program, "fit", tiny, "--plan", tiny_plan, "--json", "--threads", "2"])
    if plain.returncode != shared.returncode:
        fail("two records: plain exit %d, 3 ranks exit %d: %s" % (plain.returncode, shared.returncode, shared.stderr))
    if plain.returncode == 0:
        a, b = json.loads(plain.stdout), json.loads(shared.stdout)
        a.pop("refinement_correction", None)
        b.pop("refinement_correction", None)
        problems = []
        close(a, b, "fit", problems)
        if problems:
            fail("two records under 3 ranks: " + "; ".join(problems))
    print("ok: a file of two records under 3 ranks (exit %d)" % plain.returncode)

    # A non-finite number in the last rank's range.
    bad_rows = [list(r) for r in rows]
    bad_rows[-2][3] = "inf"
    bad = os.path.join(work, "bad.csv")
    write_rows(bad, HEADER, bad_rows)
    # Every record takes three lines (its note holds two line ends): record i starts on line 2 + 3 i.
    bad_line = 2 + 3 * (len(rows) - 2)
    plain = run([program, "select", bad, "--plan", os.path.join(work, "plan-bic.json"), "--out",
                 os.path.join(work, "bad-plain")])
    expected = "bad.csv:%d:" % bad_line
    if plain.returncode != 2 or expected not in plain.stderr:
        fail("plain run of the bad file: exit %d, stderr %r" % (plain.returncode, plain.stderr))
    for ranks in (2, 3):
        out_dir = os.path.join(work, "bad-ranks%d" % ranks)
        shared = run(launcher + [str(ranks), program, "select", bad, "--plan", os.path.join(work, "plan-bic.json"),
                                 "--out", out_dir])
        if shared.returncode != 2:
            fail("bad cell under %d ranks: exit %d (expected 2): %s" % (ranks, shared.returncode, shared.stderr))
        first_line = plain.stderr.strip().splitlines()[0]
        if first_line not in shared.stderr:
            fail("bad cell under %d ranks: stderr lacks %r: %s" % (ranks, first_line, shared.stderr))
        if os.path.exists(out_dir):
            fail("bad cell under %d ranks: the output folder %s was made" % (ranks, out_dir))
    print("ok: a bad cell in the last rank's range stops every rank with exit 2 and its place")
    shutil.rmtree(work, ignore_errors=True)
    return 0


if __name__ == "__main__":
    sys.exit(main())
