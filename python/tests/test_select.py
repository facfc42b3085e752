"""select and fit on files and data frames: the command line's audit, the DataFrame path, results."""

import json
import math
import os
import subprocess

import numpy
import pandas
import pytest

import stepledger
from conftest import LAPTOPS, STEPWISE_BIC

# Keys that record when and how long, and the seal over them (audit.schema.json: "records time").
TIME_KEYS = ("created_at", "duration_seconds", "seal", "signature")


def without_time(audit):
    return {key: value for key, value in audit.items() if key not in TIME_KEYS}


def test_cli_and_python_write_the_same_audit(tmp_path, stepledger_exe):
    cli_out = tmp_path / "cli"
    subprocess.run([stepledger_exe, "select", str(LAPTOPS), "--plan", str(STEPWISE_BIC), "--out", str(cli_out),
                    "--threads", "2", "--quiet"], check=True, stdout=subprocess.DEVNULL)
    py_out = tmp_path / "python"
    result = stepledger.select(LAPTOPS, STEPWISE_BIC, out=py_out, threads=2)
    cli_audit = json.loads((cli_out / "audit.json").read_text())
    py_audit = json.loads((py_out / "audit.json").read_text())
    assert sorted(os.listdir(cli_out)) == sorted(os.listdir(py_out)) == ["audit.json", "report.html"]
    assert without_time(cli_audit) == without_time(py_audit)
    assert without_time(json.loads(result.to_json())) == without_time(py_audit)
    # The command line's verify accepts the Python audit.
    subprocess.run([stepledger_exe, "verify", str(py_out / "audit.json"), "--data", str(LAPTOPS), "--quiet"],
                   check=True, stdout=subprocess.DEVNULL)


def test_plan_as_dict_equals_plan_file():
    plan = json.loads(STEPWISE_BIC.read_text())
    from_dict = stepledger.select(LAPTOPS, plan, threads=1)
    from_file = stepledger.select(LAPTOPS, str(STEPWISE_BIC), threads=1)
    assert from_dict.terms == from_file.terms
    assert from_dict.audit["plan"]["normalised"] == from_file.audit["plan"]["normalised"]
    # The plan's text differs (the dict is written as JSON): so do the digests chained from it.
    def without_digest(steps):
        return [{key: value for key, value in step.items() if key != "digest"} for step in steps]
    assert without_digest(from_dict.audit["steps"]) == without_digest(from_file.audit["steps"])


def relative_difference(a, b):
    if a is None or b is None:
        return 0.0 if a is b else math.inf
    return abs(a - b) / max(abs(a), abs(b), 1e-300)


@pytest.mark.parametrize("plan_name", ["stepwise_bic.json", "forward_cv.json", "all-subsets_aic.json"])
def test_frame_and_csv_give_the_same_route_and_model(laptops_frame, plan_name):
    plan = STEPWISE_BIC.parent / plan_name
    from_csv = stepledger.select(LAPTOPS, plan, threads=1)
    from_frame = stepledger.select(laptops_frame, plan, threads=1)
    assert [(s["action"], s.get("term")) for s in from_frame.audit["steps"]] == \
        [(s["action"], s.get("term")) for s in from_csv.audit["steps"]]
    assert from_frame.terms == from_csv.terms
    for a, b in zip(from_frame.audit["model"]["coefficients"], from_csv.audit["model"]["coefficients"]):
        assert a["name"] == b["name"]
        for key in ("estimate", "se", "t", "p"):
            assert relative_difference(a[key], b[key]) <= 1e-12, (a["name"], key)
    for key in ("rss", "r2", "adj_r2", "aic", "bic", "sigma"):
        assert relative_difference(from_frame.model[key], from_csv.model[key]) <= 1e-12, key
    # Row accounting: the frame's missing cells (NaN, None) are the CSV's NA cells.
    for key in ("rows_read", "rows_used", "rows_dropped"):
        assert from_frame.data[key] == from_csv.data[key], key
    assert from_frame.data["source"] == "memory" and "source" not in from_csv.data
    assert from_frame.data["file"] == "memory" and from_frame.data["encoding"] == "memory"


def test_mapping_of_numpy_arrays_and_categoricals(laptops_frame):
    frame = laptops_frame.copy()
    frame["grade"] = frame["grade"].astype("category")
    mapping = {name: frame[name].to_numpy() for name in frame.columns if name != "grade"}
    mapping["grade"] = frame["grade"].astype(object).where(frame["grade"].notna(), None).to_numpy()
    plan = json.loads(STEPWISE_BIC.read_text())
    from_category = stepledger.select(frame, plan, threads=1)
    from_mapping = stepledger.select(mapping, plan, threads=1)
    from_csv = stepledger.select(LAPTOPS, plan, threads=1)
    assert from_category.terms == from_mapping.terms == from_csv.terms
    assert numpy.allclose(from_category.coefficients["estimate"], from_csv.coefficients["estimate"], rtol=1e-12, atol=0)


def test_result_tables_and_files(tmp_path, laptops_frame):
    result = stepledger.select(laptops_frame, STEPWISE_BIC, threads=1)
    assert isinstance(result.coefficients, pandas.DataFrame)
    assert list(result.coefficients.columns[:4]) == ["name", "term", "estimate", "se"]
    assert result.coefficients["name"].iloc[0] == "intercept"
    assert list(result.route["action"])[0] == "start" and list(result.route["action"])[-1] == "stop"
    assert {"term", "score", "eligible", "step"} <= set(result.candidates.columns)
    assert set(result.criteria) >= {"n", "k", "rss", "r2", "adj_r2", "aic", "aicc", "bic"}
    assert result.criteria["n"] == result.data["rows_used"]
    assert any("optimistic" in c["message"] or "selection" in c["message"] for c in result.cautions)
    assert "age" in result.report_text()
    result.write_report(tmp_path / "report.html")
    assert (tmp_path / "report.html").read_text().startswith("<!DOCTYPE html>")
    with pytest.raises(stepledger.InputError):
        result.write_report(tmp_path / "report.html")  # no overwrite without force
    result.write_report(tmp_path / "report.html", force=True)
    result.write_audit(tmp_path / "review")
    assert json.loads((tmp_path / "review" / "audit.json").read_text())["seal"] == result.audit["seal"]


def test_fit_has_no_selection(laptops_frame):
    result = stepledger.fit(laptops_frame, STEPWISE_BIC.parent / "laptops_fit.json", threads=1)
    assert result.audit["plan"]["normalised"]["method"] == "none"
    assert len(result.terms) == 11


def test_quick_form_with_response():
    result = stepledger.select(LAPTOPS, response="resale_price", method="forward", criterion="aic", threads=1)
    assert result.audit["plan"]["normalised"]["method"] == "forward"
    assert "age_months" in result.terms


def test_progress_is_called_from_the_calling_thread(laptops_frame):
    import threading
    calls = []
    caller = threading.get_ident()

    def progress(phase, done, total):
        calls.append((phase, done, total, threading.get_ident()))

    plan = dict(json.loads(STEPWISE_BIC.read_text()), bootstrap={"replicates": 5, "seed": 3})
    stepledger.select(laptops_frame, plan, threads=2, progress=progress)
    phases = {call[0] for call in calls}
    assert {"reading", "search", "bootstrap replicates"} <= phases
    assert all(call[3] == caller for call in calls)
    reading = [call for call in calls if call[0] == "reading"]
    assert reading[-1][1] == reading[-1][2] == len(laptops_frame)


def test_progress_exception_stops_the_run(laptops_frame, tmp_path):
    def progress(phase, done, total):
        raise RuntimeError("stop here")

    with pytest.raises(RuntimeError, match="stop here"):
        stepledger.select(laptops_frame, STEPWISE_BIC, threads=1, progress=progress, work_dir=tmp_path)
    assert os.listdir(tmp_path) == []  # the spill went with the run


def test_gil_is_released_during_the_run(laptops_frame):
    import threading
    frame = pandas.concat([laptops_frame] * 50, ignore_index=True)  # 100,000 rows
    ticks = []
    done = threading.Event()

    def ticker():
        while not done.is_set():
            ticks.append(1)
            done.wait(0.001)

    thread = threading.Thread(target=ticker)
    thread.start()
    try:
        stepledger.select(frame, STEPWISE_BIC, threads=1)
    finally:
        done.set()
        thread.join()
    assert len(ticks) > 10
