"""fit and select from Python against Debian's python3-statsmodels OLS on the same frame."""

import numpy
import pandas
import pytest
import statsmodels.api as sm

import stepledger
from conftest import LAPTOPS


def test_fit_matches_statsmodels_ols(laptops_frame):
    plan = {"response": "resale_price",
            "terms": [{"name": "age", "column": "age_months"},
                      {"name": "battery", "column": "battery_health_pct"},
                      {"name": "log_storage", "log": "storage_gb"},
                      {"name": "grade", "categorical": "grade", "baseline": "C"}]}
    result = stepledger.fit(laptops_frame, plan, threads=1)
    used = laptops_frame.dropna(subset=["resale_price", "age_months", "battery_health_pct", "storage_gb", "grade"])
    levels = sorted(level for level in used["grade"].unique() if level != "C")
    design = pandas.DataFrame({"intercept": 1.0, "age": used["age_months"].astype(float),
                               "battery": used["battery_health_pct"].astype(float),
                               "log_storage": numpy.log(used["storage_gb"].astype(float))})
    for level in levels:
        design[f"grade={level}"] = (used["grade"] == level).astype(float)
    reference = sm.OLS(used["resale_price"].to_numpy(), design.to_numpy()).fit()  # Debian python3-statsmodels
    coefficients = result.coefficients.set_index("name")
    assert list(coefficients.index) == list(design.columns)
    # Agreement to 1e-9 relative: both solve by orthogonal factorisations (common practice).
    numpy.testing.assert_allclose(coefficients["estimate"], reference.params, rtol=1e-9)
    numpy.testing.assert_allclose(coefficients["se"], reference.bse, rtol=1e-9)
    numpy.testing.assert_allclose(coefficients["p"], reference.pvalues, rtol=1e-6, atol=1e-300)
    assert result.criteria["n"] == reference.nobs
    assert result.criteria["r2"] == pytest.approx(reference.rsquared, rel=1e-12)
    assert result.criteria["adj_r2"] == pytest.approx(reference.rsquared_adj, rel=1e-12)
    assert result.criteria["log_likelihood"] == pytest.approx(reference.llf, rel=1e-12)
    # README "Criteria": sigma squared counts as a parameter, so AIC and BIC are statsmodels' + 2 and + ln n.
    assert result.criteria["aic"] == pytest.approx(reference.aic + 2, rel=1e-12)
    assert result.criteria["bic"] == pytest.approx(reference.bic + numpy.log(reference.nobs), rel=1e-12)


def test_selected_model_refits_in_statsmodels(laptops_frame):
    result = stepledger.select(laptops_frame, {"response": "resale_price", "terms": [
        {"name": "age", "column": "age_months"}, {"name": "photos", "column": "photo_count"},
        {"name": "cpu", "column": "cpu_score"}, {"name": "note", "column": "seller_note_length"}],
        "method": "forward", "criterion": "aic"}, threads=1)
    columns = {"age": "age_months", "photos": "photo_count", "cpu": "cpu_score", "note": "seller_note_length"}
    chosen = [columns[term] for term in result.terms]
    used = laptops_frame.dropna(subset=["resale_price"] + list(columns.values()))
    reference = sm.OLS(used["resale_price"], sm.add_constant(used[chosen].astype(float))).fit()
    numpy.testing.assert_allclose(result.coefficients["estimate"], reference.params.to_numpy(), rtol=1e-9)
