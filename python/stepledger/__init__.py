"""stepledger for Python: the command line's run, audit and report on files or data frames.

    import stepledger
    result = stepledger.select("laptops.csv", "plan.json", out="review")
    result = stepledger.select(frame, {"response": "resale_price", "terms": "all"})
    result.coefficients, result.route, result.criteria, result.cautions

Every function runs the libraries the command line composes (no second pipeline). Data may be a
file path (CSV, .gz, .zst), a list of paths or a folder (a data set), a pandas DataFrame, or a
mapping of column names to numpy arrays (README, "Python module").
"""

import json
import math
import os
from collections.abc import Mapping

from . import _stepledger
from ._stepledger import AuditError, InputError, NumericalError, PlanError

try:  # pandas is optional: tables are lists of dicts without it
    import pandas as _pandas
except ImportError:  # pragma: no cover - Debian's python3-pandas is installed by the set-up script
    _pandas = None

import numpy as _numpy

__all__ = ["profile", "select", "fit", "verify", "compare", "rerun", "predict", "report", "fingerprint", "Profile", "Result", "Verification", "Comparison",
           "InputError", "PlanError", "NumericalError", "AuditError"]

for _error in (InputError, PlanError, NumericalError, AuditError):
    # Where the error is: file, line, column (1-based) or the JSON key; None when not known.
    _error.file = None
    _error.line = None
    _error.column = None
    _error.key = None


def _input_error(message, line=None, column=None):
    error = InputError(message)
    error.file, error.line, error.column, error.key = "memory", line, column, None
    return error


def _default_threads():
    # The command line's default: the cores this process may run on (1 to 256).
    try:
        return max(1, min(256, len(os.sched_getaffinity(0))))
    except AttributeError:  # pragma: no cover - not Linux
        return max(1, min(256, os.cpu_count() or 1))


# ---- data ---------------------------------------------------------------------------------------

def _text_fetcher(name, column_number, values):
    """fetch(first, count) -> list of str or None for an object column (read a chunk at a time)."""

    def fetch(first, count):
        cells = values[first:first + count].tolist()
        for offset, cell in enumerate(cells):
            if cell is None or type(cell) is str:
                continue
            if isinstance(cell, float) and math.isnan(cell):
                cells[offset] = None
            elif _pandas is not None and cell is _pandas.NA:
                cells[offset] = None
            elif isinstance(cell, str):
                cells[offset] = str(cell)
            else:
                raise _input_error(
                    f"memory:{first + offset + 1}:{column_number}: column '{name}' holds a value of type "
                    f"{type(cell).__name__}; a text column holds str or None (convert it first)",
                    first + offset + 1, column_number)
        return cells

    return fetch


def _category_fetcher(codes, categories):
    # The level strings of a categorical column: its categories as text (str() of any that are not).
    levels = [category if isinstance(category, str) else str(category) for category in categories] + [None]

    def fetch(first, count):
        return [levels[code] for code in codes[first:first + count].tolist()]

    return fetch


def _column_spec(name, values, column_number):
    if not isinstance(name, str):
        raise _input_error(f"memory: column {column_number} has the name {name!r}; column names must be str",
                           None, column_number)
    if _pandas is not None and isinstance(values, _pandas.Series):
        if isinstance(values.dtype, _pandas.CategoricalDtype):
            return (name, "text", _category_fetcher(values.cat.codes.to_numpy(), list(values.cat.categories)))
        if isinstance(values.dtype, _pandas.api.extensions.ExtensionDtype) and values.dtype.kind in "iufb":
            # Nullable integers and floats: missing cells (pd.NA) become NaN.
            values = values.to_numpy(dtype="float64", na_value=_numpy.nan)
        else:
            values = values.to_numpy()
    array = _numpy.asarray(values)
    if array.ndim != 1:
        raise _input_error(f"memory: column '{name}' is not one-dimensional", None, column_number)
    if array.dtype.kind in "iufb":
        return (name, "number", array)  # float64 read in place; other dtypes a chunk at a time
    if array.dtype.kind in "OUS":
        if array.dtype.kind == "S":
            array = array.astype(object)
        return (name, "text", _text_fetcher(name, column_number, array))
    raise _input_error(f"memory: column '{name}' has dtype {array.dtype}; use numbers (float64) or text "
                       "(object or categorical)", None, column_number)


def _data_argument(data):
    """A path, a list of paths, or the columns of a frame or mapping as _stepledger.Columns."""
    if isinstance(data, (str, os.PathLike)):
        return os.fspath(data)
    if isinstance(data, (list, tuple)) and data and all(isinstance(item, (str, os.PathLike)) for item in data):
        return [os.fspath(item) for item in data]
    if _pandas is not None and isinstance(data, _pandas.DataFrame):
        items = list(data.items())
    elif isinstance(data, Mapping):
        items = list(data.items())
    else:
        raise TypeError("data: expected a file path, a list of paths, a pandas DataFrame or a mapping of column "
                        f"names to numpy arrays, got {type(data).__name__}")
    specs = [_column_spec(name, values, index + 1) for index, (name, values) in enumerate(items)]
    rows = len(specs[0][2]) if specs and specs[0][1] == "number" else None
    if rows is None:
        rows = len(items[0][1]) if items else 0
    for (name, values) in items:
        if len(values) != rows:
            raise _input_error(f"memory: column '{name}' has {len(values)} rows, the first column {rows}")
    return _stepledger.Columns(specs, rows)


def _plan_arguments(plan):
    """(plan_text, plan_path): a dict with the plan file's keys, or a path to a plan file."""
    if isinstance(plan, (str, os.PathLike)):
        return None, os.fspath(plan)
    if isinstance(plan, Mapping):
        return json.dumps(plan, indent=2) + "\n", None
    raise TypeError(f"plan: expected a dict with the plan file's keys or a path, got {type(plan).__name__}")


# ---- results ------------------------------------------------------------------------------------

# Column order of the tables: the contract's order of each record's keys, then any others.
_ORDER = ("index", "step", "action", "name", "term", "size", "terms", "estimate", "se", "t", "p", "ci_low", "ci_high",
          "vif", "criterion_before", "criterion_value", "df", "rss", "score", "f", "eligible", "reason", "rule")


def _ordered_keys(keys):
    return sorted(keys, key=lambda key: (_ORDER.index(key) if key in _ORDER else len(_ORDER), key))


def _table(rows):
    rows = [{key: row[key] for key in _ordered_keys(row)} for row in rows]
    if _pandas is None:
        return rows
    return _pandas.DataFrame(rows)


_CRITERIA = ("n", "k", "rss", "tss", "r2", "adj_r2", "sigma", "log_likelihood", "aic", "aicc", "bic", "f", "f_p")


class Result:
    """One run of `select` or `fit`: the audit's typed fields, the report and the files."""

    def __init__(self, handle):
        self._handle = handle
        #: The sealed audit document (CONTRACT.md, "The audit").
        self.audit = json.loads(handle.audit_text())

    @property
    def model(self):
        """The final model as the audit records it (terms, coefficients, criteria, anova)."""
        return self.audit["model"]

    @property
    def terms(self):
        return list(self.audit["model"]["terms"])

    @property
    def criteria(self):
        """n, k, RSS, TSS, R², adjusted R², sigma, log-likelihood, AIC, AICc, BIC, F and its p."""
        return {name: self.audit["model"].get(name) for name in _CRITERIA}

    @property
    def coefficients(self):
        """One row per coefficient: name, term, estimate, se, t, p, ci_low, ci_high, vif."""
        return _table(self.audit["model"]["coefficients"])

    @property
    def route(self):
        """One row per step: index, action, term, criterion_value, rule, digest."""
        return _table({key: value for key, value in step.items() if key != "candidates"}
                      for step in self.audit["steps"])

    @property
    def candidates(self):
        """Every candidate scored, with the step it was scored in (column `step`)."""
        return _table(dict(candidate, step=step["index"]) for step in self.audit["steps"]
                      for candidate in step.get("candidates", []))

    @property
    def subsets(self):
        """All-subsets: the best models of each size (empty for other methods)."""
        return _table(self.audit.get("subsets", []))

    @property
    def cautions(self):
        """The cautions (kind, message and the figures each quotes)."""
        return list(self.audit["cautions"])

    @property
    def validation(self):
        return self.audit.get("validation")

    @property
    def data(self):
        """The audit's data section (fingerprint, rows read, used and dropped, columns)."""
        return self.audit["data"]

    @property
    def fingerprint(self):
        return self.audit["data"]["sha256"]

    def to_json(self):
        """The sealed audit as the command line writes it (audit.json)."""
        return self._handle.audit_text()

    def report_text(self):
        """The reviewer's report as text (as `stepledger report --text`)."""
        return self._handle.report_text()

    def write_report(self, path, force=False):
        """Writes the reviewer's HTML report to path (atomically; an existing file needs force)."""
        self._handle.write_report(os.fspath(path), bool(force))

    def write_audit(self, folder, force=False):
        """Writes folder/audit.json and folder/report.html as `select --out` does."""
        self._handle.write_audit(os.fspath(folder), bool(force))

    @property
    def comparison(self):
        """rerun: the comparison with the parent audit (the audit's `comparison` section), else None."""
        return self.audit.get("comparison")

    def comparison_text(self):
        """rerun: what changed, as `stepledger rerun` prints it ("" for other runs)."""
        return self._handle.comparison_text()

    def __repr__(self):
        return f"<stepledger.Result {self.audit['plan']['normalised'].get('method')}: {', '.join(self.terms) or '(no terms)'}>"


class Profile:
    """What `profile` found: each column, the fingerprint and, with a response, a starter plan."""

    def __init__(self, document):
        self.document = json.loads(document)
        self.rows = self.document["rows"]
        self.fingerprint = self.document["sha256"]
        #: The starter plan as a dict with the plan file's keys (None without a response): select takes it.
        self.starter_plan = self.document["starter_plan"]
        #: The same as the text of a plan file, one term per line (None without a response).
        self.starter_plan_text = self.document["starter_plan_text"]
        self.notes = list(self.document["notes"])

    @property
    def columns(self):
        """One row per column: name, kind, present, missing, min, max, mean, sd, levels, too_many_levels."""
        return _table(self.document["columns"])

    def __repr__(self):
        return f"<stepledger.Profile {self.rows} rows, {len(self.document['columns'])} columns>"


class Verification:
    """What `verify` found: holds, the report text, and the checks as JSON."""

    def __init__(self, holds, text, checks):
        self.holds = bool(holds)
        self.text = text
        self.checks = json.loads(checks)
        self.problems = list(self.checks.get("problems", []))

    def __bool__(self):
        return self.holds

    def __repr__(self):
        return f"<stepledger.Verification holds={self.holds}>"


class Comparison:
    """What `compare` found between two audits."""

    def __init__(self, comparison, text):
        self.comparison = json.loads(comparison)
        self.text = text

    def to_json(self):
        return json.dumps(self.comparison, indent=2)


# ---- functions ----------------------------------------------------------------------------------

def _run(data, plan, *, fit_only, method=None, criterion=None, threads=None, work_dir=None, level=0.95, refine=10,
         sign_key=None, progress=None):
    plan_text, plan_path = _plan_arguments(plan)
    handle = _stepledger.run(
        _data_argument(data), plan_text, plan_path, method or "", criterion or "", fit_only,
        _default_threads() if threads is None else int(threads), os.fspath(work_dir) if work_dir else "",
        float(level), int(refine), os.fspath(sign_key) if sign_key else "", progress)
    return Result(handle)


def profile(data, response=None, *, threads=None):
    """Each column's kind, counts, range and levels, and with response a starter plan (as `stepledger profile`)."""
    return Profile(_stepledger.profile(_data_argument(data), response or "",
                                       _default_threads() if threads is None else int(threads)))


def select(data, plan=None, *, response=None, method=None, criterion=None, out=None, force=False, threads=None,
           work_dir=None, refine=10, sign_key=None, progress=None):
    """Runs the plan's selection (as `stepledger select`); with out, writes out/audit.json and out/report.html.

    plan: a dict with the plan file's keys or a path; or response= alone for every other column as a
    candidate term. progress: a callable receiving (phase, done, total) from the calling thread.
    """
    if (plan is None) == (response is None):
        raise InputError("select: give either a plan or response= (exactly one)")
    if plan is None:
        plan = {"response": response, "terms": "all"}
    result = _run(data, plan, fit_only=False, method=method, criterion=criterion, threads=threads,
                  work_dir=work_dir, refine=refine, sign_key=sign_key, progress=progress)
    if out is not None:
        result.write_audit(out, force)
    return result


def fit(data, plan, *, level=0.95, refine=10, threads=None, work_dir=None, progress=None):
    """Fits every term of the plan, no selection (as `stepledger fit`)."""
    return _run(data, plan, fit_only=True, threads=threads, work_dir=work_dir, level=level, refine=refine,
                progress=progress)


def verify(audit, data=None, *, public_key=None, threads=None, work_dir=None):
    """Checks an audit's digests, seal and signature; with data (a path or a frame), its fingerprint and a replay."""
    holds, text, checks = _stepledger.verify(
        os.fspath(audit), None if data is None else _data_argument(data),
        os.fspath(public_key) if public_key else "", 0 if threads is None else int(threads),
        os.fspath(work_dir) if work_dir else "")
    return Verification(holds, text, checks)


def compare(old, new):
    """The differences between two audits (as `stepledger compare`)."""
    comparison, text = _stepledger.compare(os.fspath(old), os.fspath(new))
    return Comparison(comparison, text)


def fingerprint(data):
    """The data fingerprint the audit records: of a file's bytes, or of a frame's canonical binary form."""
    return _stepledger.fingerprint(_data_argument(data))


def rerun(audit, data, *, out=None, force=False, threads=None, work_dir=None, sign_key=None, progress=None):
    """The recorded plan of audit on new data (as `stepledger rerun`): a Result whose audit links to its parent.

    With out, writes out/audit.json and out/report.html. The comparison includes the old model's prices on
    the new rows (comparison["prediction"]) for a file and for data in memory alike.
    """
    handle = _stepledger.rerun(os.fspath(audit), _data_argument(data), 0 if threads is None else int(threads),
                               os.fspath(work_dir) if work_dir else "", os.fspath(sign_key) if sign_key else "",
                               progress)
    result = Result(handle)
    if out is not None:
        result.write_audit(out, force)
    return result


# predict's columns that hold numbers: counts, and numbers that are null where a row has none.
_PREDICT_COUNTS = ("row", "line")
_PREDICT_NUMBERS = ("prediction", "se_mean", "ci_low", "ci_high", "pi_low", "pi_high", "leverage", "weight")


def _rows_argument(rows):
    """predict's rows: a CSV path as is, a frame or mapping as _stepledger.Columns."""
    if isinstance(rows, (str, os.PathLike)):
        return os.fspath(rows)
    if (_pandas is not None and isinstance(rows, _pandas.DataFrame)) or isinstance(rows, Mapping):
        return _data_argument(rows)
    raise TypeError("rows: expected a CSV file path, a pandas DataFrame or a mapping of column names to numpy "
                    f"arrays or lists, got {type(rows).__name__}")


def predict(audit, rows, *, level=0.95, id=None, allow_unverified=False):
    """Prices rows with the audit's final model (as `stepledger predict --json`).

    rows: a CSV file path, or rows in memory (a pandas DataFrame, or a mapping of column names to numpy
    arrays or lists), read a chunk at a time through the same evaluator as a file: number columns as
    doubles (NaN missing, as an empty cell), text and categorical columns as level text (None or NaN
    missing); a text column is never read as numbers. Problems name a cell "memory:ROW:COLUMN" and
    `line` is the 1-based row.
    Returns one row per record: prediction, se_mean, intervals (ci_*, pi_*), back_transformed (logged
    response), leverage, weight, flags, outside_range, problems, detail, and id with id=COLUMN (a pandas
    DataFrame; its number columns are float64 with NaN where a row has none). An audit
    whose digests do not hold raises AuditError unless allow_unverified.
    """
    # The rows arrive a few thousand at a time as JSON text and go straight into the table's columns:
    # numbers into numpy arrays a chunk at a time (NaN where a row has none), so that nothing but the
    # table grows with the rows.
    columns = {}
    records = []

    def sink(text):
        parsed = json.loads(text)
        if _pandas is None:
            records.extend(parsed)
            return
        for key in parsed[0]:
            values = [row[key] for row in parsed]
            if key in _PREDICT_COUNTS:
                values = _numpy.array(values, dtype=_numpy.int64)
            elif key in _PREDICT_NUMBERS:
                values = _numpy.array([_numpy.nan if value is None else value for value in values], dtype=_numpy.float64)
            columns.setdefault(key, []).append(values)

    warning = _stepledger.predict(os.fspath(audit), _rows_argument(rows), float(level), id or "",
                                  bool(allow_unverified), sink)
    if warning:
        import warnings
        warnings.warn(warning)
    if _pandas is None:
        return _table(records)
    table = {}
    for key in _ordered_keys(columns):
        chunks = columns.pop(key)
        table[key] = (_numpy.concatenate(chunks) if key in _PREDICT_COUNTS or key in _PREDICT_NUMBERS
                      else [value for chunk in chunks for value in chunk])
    return _pandas.DataFrame(table)


def report(audit, out, data=None, *, force=False, allow_unverified=False, title=None, threads=None, work_dir=None):
    """Writes the HTML report of an audit file to out (as `stepledger report AUDIT --html OUT`).

    data (a path, a list of paths, a DataFrame or a mapping, as `--data`): the audited data, whose
    fingerprint must be the audit's; adds the diagnostics of the final model. An existing out needs
    force; an audit whose digests do not hold raises AuditError unless allow_unverified (then the
    report opens with a warning). Returns out.
    """
    _stepledger.report(os.fspath(audit), os.fspath(out), None if data is None else _data_argument(data),
                       bool(force), bool(allow_unverified), title or "",
                       _default_threads() if threads is None else int(threads),
                       os.fspath(work_dir) if work_dir else "")
    return out
