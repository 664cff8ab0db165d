"""Checks of the epidemic-curve recipe against ISO 8601 week arithmetic and pandas."""
from __future__ import annotations

from datetime import date
from pathlib import Path

import matplotlib

matplotlib.use("Agg")
import matplotlib.pyplot as plt  # noqa: E402
import pandas as pd  # noqa: E402
import pytest  # noqa: E402

RECIPES = Path(__file__).resolve().parents[2] / "recipes"
SLUG = "epidemic-curve-weekly"


@pytest.fixture
def mod(recipe_module):
    return recipe_module(SLUG)


def test_week_53_and_year_boundary(mod):
    # ISO 8601: 2026 has 53 weeks (31 Dec 2026 is a Thursday), 2027-W01 starts Mon 4 Jan 2027 (from memory,
    # confirmed below with Python's date.isocalendar, an implementation of ISO 8601)
    assert date(2026, 12, 31).isocalendar()[:2] == (2026, 53)
    assert mod.week_range("2026-W52", "2027-W02") == ["2026-W52", "2026-W53", "2027-W01", "2027-W02"]
    assert mod.week_monday("2027-W01") == date(2027, 1, 4)
    # 2025 has 52 weeks: W52 is followed by 2026-W01
    assert mod.week_range("2025-W52", "2026-W01") == ["2025-W52", "2026-W01"]


def test_week_range_matches_pandas_iso_parser(mod):
    # pandas/strptime %G-W%V-%u is an independent ISO-week parser
    weeks = mod.week_range("2019-W50", "2021-W03")
    mondays = pd.to_datetime([w + "-1" for w in weeks], format="%G-W%V-%u")
    assert (mondays[1:] - mondays[:-1] == pd.Timedelta(days=7)).all()
    assert len(weeks) == len(set(weeks))
    assert "2020-W53" in weeks  # 2020 had 53 ISO weeks (from memory; checked by the parser above)
    assert mondays[0].date() == date.fromisocalendar(2019, 50, 1)


def test_bad_labels(mod):
    with pytest.raises(ValueError):
        mod.week_monday("2026-53")
    with pytest.raises(ValueError):
        mod.week_monday("2025-W53")  # 2025 has no week 53
    with pytest.raises(ValueError):
        mod.week_range("2027-W02", "2026-W50")


def test_weekly_counts_zero_filled_and_total(mod):
    # pandas value_counts is the reference tally; empty weeks must be present with zero
    cases = pd.DataFrame({"onset_week": ["2026-W52", "2026-W52", "2027-W02", "2027-W02", "2027-W02"],
                          "classification": ["confirmed", "suspected", "probable", "confirmed",
                                             "confirmed"]})
    counts = mod.weekly_counts(cases, pad_before=0, pad_after=0)
    assert list(counts.index) == ["2026-W52", "2026-W53", "2027-W01", "2027-W02"]
    assert counts.loc["2026-W53"].sum() == 0
    assert counts.loc["2027-W02", "confirmed"] == 2
    real = pd.read_csv(RECIPES / SLUG / "data" / "cases.csv")
    full = mod.weekly_counts(real)
    assert full.to_numpy().sum() == len(real)
    ref = real["onset_week"].value_counts()
    assert (full.sum(axis=1)[ref.index] == ref).all()


def test_figure_draws(mod, monkeypatch):
    monkeypatch.chdir(RECIPES / SLUG)
    fig = mod.draw(*mod.load())
    heights = sum(p.get_height() for p in fig.axes[0].patches if hasattr(p, "get_height")
                  and p.get_width() == 1.0)
    assert heights == len(mod.load()[0])
    plt.close(fig)
