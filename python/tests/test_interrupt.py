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
