"""Rules for a person at falls risk: balance work every week, and balance demand within limits."""

from __future__ import annotations

from typing import Iterator

from .facts import _Facts
from .model import SafetyViolation

SRC_BALANCE = ("Giangregorio et al. 2014, Osteoporos Int 25:821-835 (balance training daily where possible; "
               "their later update: at least twice a week); Sherrington et al. 2019, Cochrane Database Syst Rev "
               "CD012424 (balance and functional exercise reduce falls; from memory)")
SRC_FALLS_LIMITS = ("Giangregorio et al. 2014, Osteoporos Int 25:821-835 (balance training progressed safely); "
                    "with falls risk, no high-balance-demand impact work and no resistance work of moderate or "
                    "high balance demand: common practice")

#: Days a week with balance work at least, where falls risk is flagged (see SRC_BALANCE).
MIN_BALANCE_DAYS = 2


def rule_balance_every_week(f: _Facts) -> Iterator[SafetyViolation]:
    """Where falls risk is flagged, balance work on at least two days of every week."""
    if not f.limits.falls_risk:
        return
    for wk, days in zip(f.weeks, f.balance_days):
        if len(days) < MIN_BALANCE_DAYS:
            yield SafetyViolation(
                "balance_every_week", wk.week, None,
                f"week {wk.week} has balance work on {len(days)} day(s), and the screening flags falls risk",
                f"balance work on at least {MIN_BALANCE_DAYS} days every week", SRC_BALANCE)


def rule_falls_risk_limits(f: _Facts) -> Iterator[SafetyViolation]:
    """With falls risk: no high-balance-demand impact work, no resistance work of moderate or high demand."""
    if not f.limits.falls_risk:
        return
    reported: set[str] = set()
    for week, s, x in f.exercises():
        e = f.entries.get(x.exercise_id)
        if e is None or x.exercise_id in reported:
            continue
        if (e.category == "impact" and e.balance_rank >= 3) or (e.category == "resistance" and e.balance_rank >= 2):
            reported.add(x.exercise_id)
            yield SafetyViolation(
                "falls_risk_limits", week, x.exercise_id,
                f"{x.exercise_id} asks for {['no', 'low', 'moderate', 'high'][e.balance_rank]} balance, and the "
                "screening flags falls risk",
                "with falls risk: impact work below high balance demand, resistance work of low balance demand",
                SRC_FALLS_LIMITS)
