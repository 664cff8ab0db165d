"""Checks of the Kaplan-Meier notebook recipe: survival.py against lifelines; the notebook runs."""
from __future__ import annotations

from pathlib import Path

import nbformat
import numpy as np
import pandas as pd
import pytest
from lifelines import KaplanMeierFitter
from lifelines.statistics import logrank_test, multivariate_logrank_test

RECIPES = Path(__file__).resolve().parents[2] / "recipes"
SLUG = "kaplan-meier-notebook"


@pytest.fixture
def surv(recipe_module):
    return recipe_module(SLUG, "survival.py")


@pytest.fixture(scope="module")
def data():
    return pd.read_csv(RECIPES / SLUG / "data" / "readmission.csv")


def test_kaplan_meier_matches_lifelines(surv, data):
    # lifelines KaplanMeierFitter: product-limit estimate, exponential Greenwood (log(-log)) CI
    one = data[data["pathway"] == "usual care"]
    ours = surv.kaplan_meier(one["months"], one["readmitted"]).set_index("time")
    kmf = KaplanMeierFitter().fit(one["months"], one["readmitted"])
    ref = kmf.survival_function_["KM_estimate"]
    assert np.allclose(ours["survival"].to_numpy(), ref.loc[ours.index].to_numpy())
    ci = kmf.confidence_interval_survival_function_.loc[ours.index]
    assert np.allclose(ours["lower"], ci.iloc[:, 0], atol=1e-6)
    assert np.allclose(ours["upper"], ci.iloc[:, 1], atol=1e-6)
    table = kmf.event_table.loc[ours.index[1:]]
    assert np.array_equal(ours["at_risk"].iloc[1:], table["at_risk"])
    assert np.array_equal(ours["events"].iloc[1:], table["observed"])


def test_median_and_survival_at(surv, data):
    one = data[data["pathway"] == "usual care"]
    ours = surv.kaplan_meier(one["months"], one["readmitted"])
    kmf = KaplanMeierFitter().fit(one["months"], one["readmitted"])
    # lifelines median_survival_time_ and predict() are the references
    assert surv.median_survival(ours) == pytest.approx(kmf.median_survival_time_)
    assert surv.survival_at(ours, 12.0) == pytest.approx(float(kmf.predict(12.0)))


def test_logrank_two_groups_matches_lifelines(surv, data):
    # lifelines.statistics.logrank_test is the reference two-sample log-rank test
    chi2, df, p = surv.logrank_test(data["months"], data["readmitted"], data["pathway"])
    a = data[data["pathway"] == "usual care"]
    b = data[data["pathway"] == "nurse-led"]
    ref = logrank_test(a["months"], b["months"], a["readmitted"], b["readmitted"])
    assert df == 1
    assert chi2 == pytest.approx(ref.test_statistic, rel=1e-9)
    assert p == pytest.approx(ref.p_value, rel=1e-6)


def test_logrank_three_groups_matches_lifelines(surv):
    # lifelines multivariate_logrank_test for k = 3 groups, with tied times
    rng = np.random.default_rng(11)
    time = np.round(rng.exponential(10, 90), 0) + 1
    event = rng.integers(0, 2, 90)
    group = np.repeat(["a", "b", "c"], 30)
    chi2, df, p = surv.logrank_test(time, event, group)
    ref = multivariate_logrank_test(time, group, event)
    assert df == 2
    assert chi2 == pytest.approx(ref.test_statistic, rel=1e-9)
    assert p == pytest.approx(ref.p_value, rel=1e-6)


def test_number_at_risk_and_bad_input(surv):
    assert list(surv.number_at_risk([1, 2, 2, 5, 7], [0, 2, 6])) == [5, 4, 1]
    with pytest.raises(ValueError):
        surv.kaplan_meier([1, 2], [1, 2])


def test_notebook_is_valid_and_runs_to_a_figure():
    # nbformat.validate is the reference schema check; nbclient executes top to bottom
    from nbclient import NotebookClient

    path = RECIPES / SLUG / "figure.ipynb"
    nb = nbformat.read(path, as_version=4)
    nbformat.validate(nb)
    NotebookClient(nb, timeout=120, kernel_name="python3",
                   resources={"metadata": {"path": str(path.parent)}}).execute()
    outputs = [o for c in nb.cells if c.cell_type == "code" for o in c.outputs]
    assert not [o for o in outputs if o.get("output_type") == "error"]
    assert any("image/png" in o.get("data", {}) for o in outputs)
