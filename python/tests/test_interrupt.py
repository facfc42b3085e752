"""Ctrl-C during a long select: KeyboardInterrupt in Python, and no spill left in the work folder."""

import os
import signal
import subprocess
import sys
import textwrap
import time

CHILD = textwrap.dedent("""
    import sys, numpy, stepledger
    rows = 400_000
    random = numpy.random.default_rng(5)
    frame = {f"x{i}": random.normal(size=rows) for i in range(8)}
    frame["y"] = sum(frame.values()) + random.normal(size=rows)
    plan = {"response": "y", "terms": "all", "method": "stepwise", "criterion": "bic",
            "bootstrap": {"replicates": 400, "seed": 1}}
    said = False
    def progress(phase, done, total):
        global said
        if phase.startswith("bootstrap") and not said:
            said = True
            print("bootstrap", flush=True)
    try:
        stepledger.select(frame, plan, threads=1, work_dir=sys.argv[1], progress=progress)
        print("finished", flush=True)
    except KeyboardInterrupt:
        print("interrupted", flush=True)
""")


def test_ctrl_c_stops_the_run_and_removes_the_spill(tmp_path):
    work = tmp_path / "work"
    work.mkdir()
    child = subprocess.Popen([sys.executable, "-c", CHILD, str(work)], stdout=subprocess.PIPE, text=True,
                             env=dict(os.environ))
    try:
        assert child.stdout.readline().strip() == "bootstrap"
        assert os.listdir(work) != []  # the spill is there while the run goes on
        time.sleep(0.2)
        child.send_signal(signal.SIGINT)
        output, _ = child.communicate(timeout=120)
    finally:
        if child.poll() is None:
            child.kill()
    assert output.strip() == "interrupted"
    assert child.returncode == 0
    assert os.listdir(work) == []


# A frame large enough that the calling thread's share of the factor pass over its spill takes about
# a second (measured: 0.5 s for 3M rows and 7 columns with two threads); without the pass's check
# the run has no point where Python is called while the pass runs.
PASS_CHILD = textwrap.dedent("""
    import sys, numpy, stepledger
    rows = 5_000_000
    random = numpy.random.default_rng(7)
    frame = {f"x{i}": random.normal(size=rows) for i in range(6)}
    frame["y"] = sum(frame.values()) + random.normal(size=rows)
    plan = {"response": "y", "terms": "all"}
    seen = [("", 0, 0)]
    def progress(phase, done, total):
        seen[0] = (phase, done, total)
        if phase == "factor pass" and done == 1 and sys.argv[2] == "signal":
            print("factor pass", flush=True)
        if phase == "factor pass" and done == 3 and sys.argv[2] == "raise":
            raise KeyboardInterrupt
    try:
        stepledger.fit(frame, plan, threads=int(sys.argv[3]), work_dir=sys.argv[1], progress=progress)
        print("finished", flush=True)
    except KeyboardInterrupt:
        phase, done, total = seen[0]
        print("interrupted in " + phase + (" before its end" if done < total else " at its end"), flush=True)
""")


def run_pass_child(work, how, threads):
    return subprocess.Popen([sys.executable, "-c", PASS_CHILD, str(work), how, str(threads)], stdout=subprocess.PIPE,
                            text=True, env=dict(os.environ))


def test_ctrl_c_during_the_factor_pass_stops_it_and_removes_the_spill(tmp_path):
    # Two threads: the calling thread folds a share of the pass and checks for Ctrl-C between its blocks.
    work = tmp_path / "work"
    work.mkdir()
    child = run_pass_child(work, "signal", 2)
    try:
        assert child.stdout.readline().strip() == "factor pass"
        assert os.listdir(work) != []  # the spill the pass reads
        child.send_signal(signal.SIGINT)
        output, _ = child.communicate(timeout=120)
    finally:
        if child.poll() is None:
            child.kill()
    # Stopped inside the pass: a pass that ran to its end would have gone on to the next phase.
    assert output.strip() == "interrupted in factor pass before its end"
    assert child.returncode == 0
    assert os.listdir(work) == []


def test_an_error_raised_by_progress_during_the_factor_pass_stops_it(tmp_path):
    work = tmp_path / "work"
    work.mkdir()
    child = run_pass_child(work, "raise", 1)
    output, _ = child.communicate(timeout=120)
    assert output.strip() == "interrupted in factor pass before its end"
    assert os.listdir(work) == []
