"""Kaplan-Meier estimates, numbers at risk and the log-rank test, in plain numpy/scipy.

Imported by figure.ipynb. Kept as a module so the statistics are tested on their own and the
notebook stays about the figure.
"""
from __future__ import annotations

import numpy as np
import pandas as pd
from scipy import stats


def _check(time: np.ndarray, event: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    time = np.asarray(time, dtype=float)
    event = np.asarray(event).astype(int)
    if time.shape != event.shape or np.any(time < 0) or not np.isin(event, (0, 1)).all():
        raise ValueError("times must be non-negative and events 0 (censored) or 1 (event)")
    return time, event


def kaplan_meier(time, event, alpha: float = 0.05) -> pd.DataFrame:
    """Product-limit survival with Greenwood variance and a log(-log) confidence interval.

    One row per distinct time (plus time 0): at_risk, events, censored, survival, lower, upper.
    Why log(-log): the interval stays inside [0, 1] and behaves better than the plain Greenwood
    interval in the tails, where few people remain at risk.
    """
    time, event = _check(time, event)
    times = np.unique(time)
    at_risk = np.array([(time >= t).sum() for t in times])
    events = np.array([event[time == t].sum() for t in times])
    censored = np.array([(time == t).sum() for t in times]) - events
    survival = np.cumprod(1 - events / at_risk)
    with np.errstate(divide="ignore", invalid="ignore"):
        greenwood = np.cumsum(np.where(at_risk > events, events / (at_risk * (at_risk - events)),
                                       np.inf))
        z = stats.norm.ppf(1 - alpha / 2)
        log_s = np.log(survival)
        spread = z * np.sqrt(greenwood) / np.abs(log_s)
        lower = np.exp(-np.exp(np.log(-log_s) + spread))
        upper = np.exp(-np.exp(np.log(-log_s) - spread))
    lower = np.where(survival == 1, 1.0, np.nan_to_num(lower, nan=0.0))
    upper = np.where(survival == 1, 1.0, np.nan_to_num(upper, nan=0.0))
    table = pd.DataFrame({"time": times, "at_risk": at_risk, "events": events,
                          "censored": censored, "survival": survival, "lower": lower,
                          "upper": upper})
    start = pd.DataFrame({"time": [0.0], "at_risk": [len(time)], "events": [0], "censored": [0],
                          "survival": [1.0], "lower": [1.0], "upper": [1.0]})
    return pd.concat([start, table[table["time"] > 0]], ignore_index=True)


def survival_at(table: pd.DataFrame, when: float) -> float:
    """Survival at time ``when``: the step function is right-continuous."""
    return float(table.loc[table["time"] <= when, "survival"].iloc[-1])


def median_survival(table: pd.DataFrame) -> float:
    """First time at which survival is at or below one half; infinity when never reached."""
    below = table.loc[table["survival"] <= 0.5, "time"]
    return float(below.iloc[0]) if len(below) else float("inf")


def number_at_risk(time, at) -> np.ndarray:
    """People still followed (time >= t) at each time in ``at``: the table under the curves."""
    time = np.asarray(time, dtype=float)
    return np.array([(time >= t).sum() for t in np.atleast_1d(at)])


def logrank_test(time, event, group) -> tuple[float, int, float]:
    """Log-rank test of equal survival across groups: (chi-square, degrees of freedom, p).

    At each event time the observed events per group are compared with those expected if the
    hazards were equal, with the hypergeometric covariance; the statistic is O-E' V^-1 O-E on
    k-1 groups.
    """
    time, event = _check(time, event)
    group = np.asarray(group)
    labels = np.unique(group)
    k = len(labels)
    observed_minus_expected = np.zeros(k)
    covariance = np.zeros((k, k))
    for t in np.unique(time[event == 1]):
        risk = np.array([((time >= t) & (group == g)).sum() for g in labels], dtype=float)
        dead = np.array([((time == t) & (event == 1) & (group == g)).sum() for g in labels],
                        dtype=float)
        n, d = risk.sum(), dead.sum()
        observed_minus_expected += dead - d * risk / n
        if n > 1:
            share = risk / n
            covariance += d * (n - d) / (n - 1) * (np.diag(share) - np.outer(share, share))
    oe, cov = observed_minus_expected[:-1], covariance[:-1, :-1]
    statistic = float(oe @ np.linalg.solve(cov, oe))
    return statistic, k - 1, float(stats.chi2.sf(statistic, k - 1))
