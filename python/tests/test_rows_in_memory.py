"""Rows in memory where a command takes a file: predict on a frame, rerun's prices of the old model on
a frame, and report (with data as a path or a frame).

The reference of each comparison is the command's own CSV path (its numbers are checked against outside
sources in tests/engine/prediction_test.cpp and python/tests/test_statsmodels.py); agreement to 1e-12
relative is common practice for two readings of the same doubles through the same arithmetic (they
should agree to the bit; the tolerance only keeps the test from naming the order of operations).
"""

import copy
import csv
import json
import math
import subprocess

import numpy
import pandas
import pytest

import stepledger
from conftest import LAPTOPS, STEPWISE_BIC

TO_PRICE = LAPTOPS.parent / "laptops_to_price.csv"
MONTH2 = LAPTOPS.parent / "laptops_month2.csv"


def close(a, b, path="", rel=1e-12):
    """a equals b, numbers to rel (relative, with an absolute floor of rel for values near 0)."""
    if isinstance(a, dict):
        assert isinstance(b, dict) and a.keys() == b.keys(), f"{path}: keys {sorted(a)} != {sorted(b)}"
        for key in a:
            close(a[key], b[key], f"{path}.{key}", rel)
    elif isinstance(a, list):
        assert isinstance(b, list) and len(a) == len(b), f"{path}: {a!r} != {b!r}"
        for index, (x, y) in enumerate(zip(a, b)):
            close(x, y, f"{path}[{index}]", rel)
    elif isinstance(a, float) or isinstance(b, float):
        assert isinstance(a, (int, float)) and isinstance(b, (int, float)), f"{path}: {a!r} != {b!r}"
        assert math.isclose(a, b, rel_tol=rel, abs_tol=rel), f"{path}: {a!r} != {b!r}"
    else:
        assert a == b, f"{path}: {a!r} != {b!r}"


@pytest.fixture(scope="module")
def audit(tmp_path_factory):
    folder = tmp_path_factory.mktemp("review")
    stepledger.select(LAPTOPS, STEPWISE_BIC, threads=1, out=folder)
    return folder / "audit.json"


def rows_to_price():
    """laptops_to_price.csv as a frame with the cases a pricing batch meets: a categorical column
    (grade), an integer column (memory_gb), a row outside the fitted range (TP-005: 120 months), a
    level the model never saw (TP-007: grade D), a missing value (TP-008: NaN battery), a value a log
    cannot take (TP-009: 0 GB), and a non-finite number (TP-010: screen inf)."""
    frame = pandas.read_csv(TO_PRICE, float_precision="round_trip")
    extra = frame.iloc[[0]].copy()
    extra["listing_id"] = "TP-010"
    extra["screen_in"] = math.inf
    frame = pandas.concat([frame, extra], ignore_index=True)
    frame["grade"] = frame["grade"].astype("category")
    frame["memory_gb"] = frame["memory_gb"].astype("int64")
    assert math.isnan(frame.loc[7, "battery_health_pct"])
    return frame


def write_csv(frame, path):
    """The frame as CSV, every double written as its shortest round-trip text (repr), NaN as an empty cell."""
    with open(path, "w", newline="") as handle:
        writer = csv.writer(handle, lineterminator="\n")
        writer.writerow(frame.columns)
        for row in frame.itertuples(index=False):
            writer.writerow("" if (isinstance(value, float) and math.isnan(value)) else
                            repr(value) if isinstance(value, float) else value for value in row)


def as_records(table):
    return [{key: (None if isinstance(value, float) and math.isnan(value) else value) for key, value in row.items()}
            for row in table.to_dict(orient="records")]


def test_predict_on_a_frame_equals_predict_on_the_same_rows_as_csv(tmp_path, audit):
    frame = rows_to_price()
    path = tmp_path / "rows.csv"
    write_csv(frame, path)
    from_csv = as_records(stepledger.predict(audit, path, id="listing_id"))
    from_frame = as_records(stepledger.predict(audit, frame, id="listing_id"))
    assert len(from_csv) == len(from_frame) == 10
    header = list(frame.columns)
    for csv_row, frame_row in zip(copy.deepcopy(from_csv), copy.deepcopy(from_frame)):
        # The two name places their own way: a file by line (the header is line 1) and byte
        # column, columns in memory by 1-based row and column number ("memory:ROW:COLUMN").
        assert csv_row.pop("line") == frame_row.pop("line") + 1 == frame_row["row"] + 1
        for csv_problem, frame_problem in zip(csv_row["problems"], frame_row["problems"]):
            csv_where, frame_where = csv_problem.pop("where"), frame_problem.pop("where")
            assert csv_where.startswith(f"{path}:{frame_row['row'] + 1}:")
            assert frame_where == f"memory:{frame_row['row']}:{header.index(frame_problem['column']) + 1}"
        close(csv_row, frame_row, csv_row["id"])
    by_id = {row["id"]: row for row in from_frame}
    assert by_id["TP-001"]["flags"] == [] and by_id["TP-001"]["prediction"] > 0
    assert "outside-range" in by_id["TP-005"]["flags"] and by_id["TP-005"]["outside_range"][0]["column"] == "age_months"
    assert by_id["TP-007"]["flags"] == ["unknown-level"] and by_id["TP-007"]["problems"][0]["text"] == "D"
    assert by_id["TP-008"]["flags"] == ["missing"] and by_id["TP-008"]["prediction"] is None
    assert by_id["TP-008"]["problems"][0]["column"] == "battery_health_pct"
    assert by_id["TP-009"]["flags"] == ["invalid-value"] and by_id["TP-009"]["problems"][0]["column"] == "storage_gb"
    assert by_id["TP-010"]["problems"][0]["text"] == "inf"
    assert by_id["TP-010"]["problems"][0]["reason"] == "is not a finite number"
    # A mapping of lists and arrays prices the same rows the same way.
    mapping = {name: frame[name].tolist() for name in frame.columns}
    mapping["grade"] = numpy.array(frame["grade"].astype(str), dtype=object)
    close(as_records(stepledger.predict(audit, mapping, id="listing_id")), from_frame)


def test_predict_on_a_frame_refuses_what_the_file_path_refuses(audit):
    frame = rows_to_price().drop(columns=["cpu_score"])
    with pytest.raises(stepledger.InputError, match="memory: no column 'cpu_score' in the header; term 'cpu'"):
        stepledger.predict(audit, frame)
    with pytest.raises(stepledger.InputError, match="memory: no column 'sku' in the header"):
        stepledger.predict(audit, rows_to_price(), id="sku")
    with pytest.raises(TypeError, match="rows: expected"):
        stepledger.predict(audit, 42)
    # A text column is never read as numbers (a data frame's text columns are categorical).
    as_text = rows_to_price().astype({"cpu_score": str})
    flags = stepledger.predict(audit, as_text)["flags"]
    assert all(flags[i] == ["invalid-value"] for i in (0, 1, 3))


def test_rerun_on_a_frame_compares_the_old_models_prices_as_for_the_file(tmp_path, audit):
    from_file = stepledger.rerun(audit, MONTH2, threads=1)
    frame = pandas.read_csv(MONTH2, float_precision="round_trip")
    from_frame = stepledger.rerun(audit, frame, threads=1)
    assert from_frame.comparison["prediction"]["available"] is True
    assert from_frame.comparison["prediction"]["rows"] > 0
    file_comparison, frame_comparison = dict(from_file.comparison), dict(from_frame.comparison)
    # The new data's fingerprint is of the file's bytes for a file and of the canonical form for a
    # frame (README "Data in memory"): each is checked against its own source.
    assert file_comparison.pop("new_data_sha256") == stepledger.fingerprint(MONTH2)
    assert frame_comparison.pop("new_data_sha256") == stepledger.fingerprint(frame)
    close(file_comparison, frame_comparison, "comparison")
    assert from_frame.comparison_text() == from_file.comparison_text().replace(
        stepledger.fingerprint(MONTH2), stepledger.fingerprint(frame))


def test_report_equals_the_commands_report(tmp_path, audit, stepledger_exe):
    for data in (None, LAPTOPS):
        cli = tmp_path / f"cli-{data is None}.html"
        command = [stepledger_exe, "report", str(audit), "--html", str(cli), "--quiet"]
        if data is not None:
            command += ["--data", str(data)]
        subprocess.run(command, check=True, stdout=subprocess.DEVNULL)
        python = tmp_path / f"python-{data is None}.html"
        assert stepledger.report(audit, python, data=data) == python
        assert python.read_bytes() == cli.read_bytes()
    # With the data the report adds the diagnostics of the final model: the two files differ.
    assert (tmp_path / "python-True.html").read_bytes() != (tmp_path / "python-False.html").read_bytes()
    with pytest.raises(stepledger.InputError, match="file exists"):
        stepledger.report(audit, python, data=LAPTOPS)
    stepledger.report(audit, python, force=True)
    assert python.read_bytes() == (tmp_path / "cli-True.html").read_bytes()
    # The data must be the audited data.
    with pytest.raises(stepledger.InputError, match="not the data of audit.json"):
        stepledger.report(audit, tmp_path / "other.html", data=MONTH2)


def test_report_with_a_frame_equals_the_report_the_run_wrote(tmp_path, laptops_frame):
    stepledger.select(laptops_frame, STEPWISE_BIC, threads=1, out=tmp_path / "review")
    audit = tmp_path / "review" / "audit.json"
    stepledger.report(audit, tmp_path / "again.html", data=laptops_frame)
    # select --out renders from the run's own diagnostics pass; report from a pass over the frame.
    assert (tmp_path / "again.html").read_bytes() == (tmp_path / "review" / "report.html").read_bytes()


def test_report_refuses_an_edited_audit_unless_asked(tmp_path, audit, stepledger_exe):
    edited = json.loads(audit.read_text())
    edited["model"]["coefficients"][1]["estimate"] += 1
    tampered = tmp_path / "tampered.json"
    tampered.write_text(json.dumps(edited))
    with pytest.raises(stepledger.AuditError, match="does not verify"):
        stepledger.report(tampered, tmp_path / "t.html")
    stepledger.report(tampered, tmp_path / "t.html", allow_unverified=True)
    subprocess.run([stepledger_exe, "report", str(tampered), "--html", str(tmp_path / "cli.html"), "--allow-unverified",
                    "--quiet"], check=True, stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL)
    assert (tmp_path / "t.html").read_bytes() == (tmp_path / "cli.html").read_bytes()
