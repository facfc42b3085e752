"""Each exception type with the location the command line names."""

import json
import math

import numpy
import pandas
import pytest

import stepledger
from conftest import LAPTOPS, STEPWISE_BIC


def test_exception_classes():
    assert issubclass(stepledger.PlanError, stepledger.InputError)
    assert issubclass(stepledger.AuditError, stepledger.InputError)
    assert issubclass(stepledger.InputError, ValueError)
    assert issubclass(stepledger.NumericalError, ArithmeticError)


def test_plan_error_names_the_key():
    plan = {"response": "resale_price", "terms": [{"name": "a", "power": {"column": "age_months", "degree": 99}}]}
    with pytest.raises(stepledger.PlanError) as caught:
        stepledger.select(LAPTOPS, plan)
    assert caught.value.key == "terms[0].power.degree"
    assert "terms[0].power.degree" in str(caught.value)


def test_unknown_plan_key_is_a_plan_error():
    with pytest.raises(stepledger.PlanError) as caught:
        stepledger.select(LAPTOPS, {"response": "resale_price", "terms": "all", "colour": 1})
    assert caught.value.key == "colour"


def test_input_error_in_a_file_names_file_line_column(tmp_path):
    data = tmp_path / "bad.csv"
    data.write_text("y,x\n1,2\n2,inf\n3,4\n")
    with pytest.raises(stepledger.InputError) as caught:
        stepledger.select(data, {"response": "y", "terms": "all"})
    error = caught.value
    assert (error.file, error.line, error.column) == (str(data), 3, 3)
    assert str(error).startswith(f"{data}:3:3:")


def test_input_error_in_a_frame_names_row_and_column():
    frame = pandas.DataFrame({"y": [1.0, 2.0, 3.0], "x": [1.0, math.inf, 3.0]})
    with pytest.raises(stepledger.InputError) as caught:
        stepledger.select(frame, {"response": "y", "terms": "all"})
    assert (caught.value.file, caught.value.line, caught.value.column) == ("memory", 2, 2)


def test_text_column_of_other_objects_is_an_input_error():
    frame = pandas.DataFrame({"y": [1.0, 2.0, 3.0], "x": ["a", 5, "b"]})
    with pytest.raises(stepledger.InputError) as caught:
        stepledger.select(frame, {"response": "y", "terms": "all"})
    assert (caught.value.line, caught.value.column) == (2, 2)


def test_missing_column_names_the_plan_key():
    with pytest.raises(stepledger.InputError) as caught:
        stepledger.select(LAPTOPS, {"response": "no_such_column", "terms": "all"})
    assert "no_such_column" in str(caught.value)


def test_audit_error_names_file_and_key(tmp_path):
    broken = tmp_path / "audit.json"
    broken.write_text('{"format": "stepledger-audit",\n "format_version": "four"}\n')
    with pytest.raises(stepledger.AuditError) as caught:
        stepledger.verify(broken)
    assert str(broken) in str(caught.value)
    not_json = tmp_path / "not.json"
    not_json.write_text("{\n  \"a\": ,\n}\n")
    with pytest.raises(stepledger.AuditError) as caught:
        stepledger.verify(not_json)
    assert f"{not_json}:2:" in str(caught.value)


def test_no_used_row_is_an_input_error():
    # Refused before any numerical work (RequireSomethingToFit), as the command line's exit 2.
    frame = pandas.DataFrame({"y": [float("nan")] * 3, "x": [1.0, 2.0, 3.0]})
    with pytest.raises(stepledger.InputError):
        stepledger.select(frame, {"response": "y", "terms": "all"})


def test_numerical_error_when_the_typed_copy_is_damaged(tmp_path, laptops_frame):
    # The spill cut short while the run goes on (a failing disk): the refinement's read-back is a
    # NumericalError, exit 3 on the command line; it has no place in the input to name.
    damaged = []

    def progress(phase, done, total):
        if phase == "search" and not damaged:
            for path in tmp_path.rglob("*.bin"):
                with open(path, "r+b") as spill:
                    spill.truncate(16)
                damaged.append(path)

    with pytest.raises(stepledger.NumericalError) as caught:
        stepledger.select(laptops_frame, STEPWISE_BIC, threads=1, work_dir=tmp_path, progress=progress)
    assert damaged
    assert "typed copy of the rows" in str(caught.value)
    assert (caught.value.file, caught.value.line, caught.value.column, caught.value.key) == (None, None, None, None)
    assert list(tmp_path.iterdir()) == []
