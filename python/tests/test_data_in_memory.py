"""The canonical binary form of data in memory (README "Data in memory"), recomputed here with
hashlib and struct alone, and verify with data=frame."""

import hashlib
import json
import struct

import numpy
import pandas
import pytest

import stepledger
from conftest import LAPTOPS, STEPWISE_BIC

MISSING_NUMBER = struct.pack("<Q", 0x7FF8000000000000)
MISSING_TEXT = struct.pack("<Q", 0xFFFFFFFFFFFFFFFF)


def canonical_fingerprint(columns):
    """columns: list of (name, kind, cells), kind "n" (floats, NaN missing) or "t" (str or None)."""
    rows = len(columns[0][2])
    material = b"stepledger-columns-1\n" + struct.pack("<QQ", rows, len(columns))
    for name, kind, cells in columns:
        digest = hashlib.sha256()
        for cell in cells:
            if kind == "n":
                digest.update(MISSING_NUMBER if cell != cell else struct.pack("<d", cell))
            elif cell is None:
                digest.update(MISSING_TEXT)
            else:
                data = cell.encode("utf-8")
                digest.update(struct.pack("<Q", len(data)) + data)
        encoded = name.encode("utf-8")
        material += struct.pack("<Q", len(encoded)) + encoded + kind.encode() + digest.digest()
    return hashlib.sha256(material).hexdigest()


def test_fingerprint_of_a_small_frame_follows_the_documented_form():
    frame = pandas.DataFrame({
        "price": [100.0, float("nan"), -0.0, 1e300],
        "grade": ["A", None, "B", "é"],
        "age": numpy.array([1, 2, 3, 4], dtype=numpy.int64),
    })
    expected = canonical_fingerprint([
        ("price", "n", [100.0, float("nan"), -0.0, 1e300]),
        ("grade", "t", ["A", None, "B", "é"]),
        ("age", "n", [1.0, 2.0, 3.0, 4.0]),
    ])
    assert stepledger.fingerprint(frame) == expected
    # A categorical column and a mapping of arrays give the same form.
    as_category = frame.assign(grade=frame["grade"].astype("category"))
    assert stepledger.fingerprint(as_category) == expected
    mapping = {"price": frame["price"].to_numpy(), "grade": numpy.array(["A", None, "B", "é"], dtype=object),
               "age": numpy.array([1, 2, 3, 4])}
    assert stepledger.fingerprint(mapping) == expected
    # Order, names and values count.
    assert stepledger.fingerprint(frame[["grade", "price", "age"]]) != expected
    assert stepledger.fingerprint(frame.rename(columns={"age": "months"})) != expected


def test_fingerprint_of_the_laptops_frame_and_the_audit(laptops_frame):
    columns = []
    for name in laptops_frame.columns:
        series = laptops_frame[name]
        if series.dtype == object:
            columns.append((name, "t", [None if v is None or v != v else v for v in series.tolist()]))
        else:
            columns.append((name, "n", [float(v) for v in series.tolist()]))
    expected = canonical_fingerprint(columns)
    # The whole form at once, as an outside tool with numpy would write it.
    result = stepledger.select(laptops_frame, STEPWISE_BIC, threads=1)
    assert result.fingerprint == expected == stepledger.fingerprint(laptops_frame)
    assert result.data["source"] == "memory"


def test_fingerprint_of_a_file_is_the_audits():
    result = stepledger.select(LAPTOPS, STEPWISE_BIC, threads=1)
    assert stepledger.fingerprint(LAPTOPS) == result.fingerprint


def test_verify_with_the_frame_replays_the_route(tmp_path, laptops_frame):
    stepledger.select(laptops_frame, STEPWISE_BIC, threads=1, out=tmp_path / "review")
    audit = tmp_path / "review" / "audit.json"
    intact = stepledger.verify(audit)
    assert intact.holds and not intact.checks.get("data_checked", False)
    checked = stepledger.verify(audit, data=laptops_frame)
    assert checked.holds, checked.text
    assert checked.checks["checks"]["replay"] == "holds"
    changed = laptops_frame.copy()
    changed.loc[5, "resale_price"] += 1.0
    different = stepledger.verify(audit, data=changed)
    assert not different.holds
    assert "fingerprint" in different.problems[0] or "sha256" in different.problems[0]


def test_compare_two_audits(tmp_path, laptops_frame):
    stepledger.select(laptops_frame, STEPWISE_BIC, threads=1, out=tmp_path / "a")
    stepledger.select(laptops_frame.iloc[:1500], STEPWISE_BIC, threads=1, out=tmp_path / "b")
    comparison = stepledger.compare(tmp_path / "a" / "audit.json", tmp_path / "b" / "audit.json")
    assert comparison.comparison["same_data"] is False
    assert comparison.text


def test_rerun_on_a_new_month_links_its_parent(tmp_path, laptops_frame):
    import pandas
    stepledger.select(LAPTOPS, STEPWISE_BIC, threads=1, out=tmp_path / "first")
    parent = tmp_path / "first" / "audit.json"
    month2 = LAPTOPS.parent / "laptops_month2.csv"
    from_file = stepledger.rerun(parent, month2, threads=1, out=tmp_path / "second")
    assert from_file.audit["parent"]["seal"] == json.loads(parent.read_text())["seal"]
    assert from_file.comparison["prediction"]["available"] is True
    assert "age" in from_file.comparison_text()
    assert (tmp_path / "second" / "report.html").exists()
    frame = pandas.read_csv(month2, float_precision="round_trip")
    from_frame = stepledger.rerun(parent, frame, threads=1)
    assert from_frame.terms == from_file.terms
    assert from_frame.comparison["prediction"]["available"] is True  # as for the file (test_rows_in_memory.py)
    assert from_frame.data["source"] == "memory"


def test_predict_prices_and_flags_the_rows(tmp_path):
    stepledger.select(LAPTOPS, STEPWISE_BIC, threads=1, out=tmp_path / "review")
    audit = tmp_path / "review" / "audit.json"
    prices = stepledger.predict(audit, LAPTOPS.parent / "laptops_to_price.csv", id="listing_id")
    assert list(prices["id"]) == [f"TP-00{i}" for i in range(1, 10)]
    flags = dict(zip(prices["id"], prices["flags"]))
    assert flags["TP-001"] == [] and "outside-range" in flags["TP-005"]
    assert "unknown-level" in flags["TP-007"] and "missing" in flags["TP-008"]
    assert prices.loc[0, "pi_low"] < prices.loc[0, "prediction"] < prices.loc[0, "pi_high"]
    edited = json.loads(audit.read_text())
    edited["model"]["coefficients"][1]["estimate"] += 1
    tampered = tmp_path / "tampered.json"
    tampered.write_text(json.dumps(edited))
    with pytest.raises(stepledger.AuditError):
        stepledger.predict(tampered, LAPTOPS.parent / "laptops_to_price.csv")
    with pytest.warns(UserWarning):
        stepledger.predict(tampered, LAPTOPS.parent / "laptops_to_price.csv", allow_unverified=True)


def test_profile_of_a_file_and_a_frame(tmp_path, stepledger_exe, laptops_frame):
    import subprocess
    cli = json.loads(subprocess.run([stepledger_exe, "profile", str(LAPTOPS), "--response", "resale_price", "--json"],
                                    check=True, capture_output=True, text=True).stdout)
    from_file = stepledger.profile(LAPTOPS, response="resale_price")
    assert from_file.document["columns"] == cli["columns"]
    assert from_file.starter_plan == cli["starter_plan"] and from_file.notes == cli["notes"]
    assert from_file.rows == 2000 and from_file.fingerprint == stepledger.fingerprint(LAPTOPS)
    from_frame = stepledger.profile(laptops_frame, response="resale_price")
    assert from_frame.fingerprint == stepledger.fingerprint(laptops_frame)
    assert from_frame.starter_plan == from_file.starter_plan
    assert list(from_frame.columns["kind"]) == list(from_file.columns["kind"])
    assert from_file.starter_plan_text.startswith("{\n")
    result = stepledger.select(laptops_frame, from_frame.starter_plan, threads=1)
    assert result.terms
    assert stepledger.profile(laptops_frame).starter_plan is None
    with pytest.raises(stepledger.InputError, match="response: column 'grade' is categorical"):
        stepledger.profile(laptops_frame, response="grade")
