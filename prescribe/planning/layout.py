"""Where a week's sessions fall (1 = Monday) and what each holds: the week layout.

Impact days spread over the week, resistance on non-consecutive days (across the week end
too), balance with the impact work and on extra days as asked; with falls risk balance
comes first in a mixed session (Giangregorio et al. 2014, Osteoporos Int 25:821-835).
The layout is a mixin of the builder (:class:`~prescribe.planning.builder._Builder`).
"""

from __future__ import annotations

from .dosing import _session_oi, prescribed_pct_1rm
from .options import OPTION_DEFAULTS
from .progression import reassessment_weeks
from .sources import BALANCE_FIRST_WEEKS, BALANCE_STAGE_WEEKS, BALANCE_STAGE_WEEKS_FALLS

# Day layouts (1 = Monday).  Resistance on non-consecutive days, across the week end too.
_IMPACT_DAYS = {1: (1,), 2: (1, 4), 3: (1, 3, 5), 4: (1, 3, 5, 7), 5: (1, 2, 3, 5, 6),
                6: (1, 2, 3, 4, 5, 6), 7: (1, 2, 3, 4, 5, 6, 7)}
_RESISTANCE_DAYS = {1: (2,), 2: (2, 6), 3: (2, 4, 6)}
_EXTRA_BALANCE_DAY_ORDER = (7, 2, 4, 6, 1, 3, 5)


class _Layout:
    """The builder's weeks laid out day by day (a mixin: the builder holds the choices and doses)."""

    def balance_sessions(self) -> int:
        """Balance sessions a week: the option, or 3 (the template's falls-risk number with falls risk)."""
        k_b = self.options.balance_sessions_per_week
        if k_b is None:
            k_b = (self.tpl.balance["sessions_falls_risk"] if self.falls
                   else OPTION_DEFAULTS["balance_sessions_per_week"])
        return k_b

    def lay_out_weeks(self) -> tuple[list[dict], dict[str, list[list[dict]]], bool]:
        """The weeks as dicts; the distinct exercise lists used, by kind ("impact", "resistance",
        "balance"); and whether any week has level 2-3 impacts."""
        opts, tpl = self.options, self.tpl
        k_i, k_r = opts.impact_sessions_per_week, opts.resistance_sessions_per_week
        k_b = self.balance_sessions()
        bal_minutes = tpl.balance["minutes_falls_risk"] if self.falls else None
        impact_days = _IMPACT_DAYS[k_i]
        res_days = _RESISTANCE_DAYS[k_r]
        bal_days = list(impact_days[:k_b])
        for d in _EXTRA_BALANCE_DAY_ORDER:
            if len(bal_days) >= k_b:
                break
            if d not in bal_days:
                bal_days.append(d)
        review = set(reassessment_weeks(opts.weeks))
        weeks = []
        c_imp: dict[tuple, tuple] = {}
        c_res: dict[tuple, tuple] = {}
        c_bal: dict[tuple, tuple] = {}
        used_l23 = False
        schedule = self.impact_schedule()
        self.week_lists: list[tuple[list, list, list]] = []
        self._time_lifts(schedule)
        for w, (level, vol, step_up, weak, text, ph) in enumerate(schedule, start=1):
            b_stage = (w - 1) // (BALANCE_STAGE_WEEKS_FALLS if self.falls else BALANCE_STAGE_WEEKS)
            minutes = bal_minutes or min(tpl.balance["minutes_start"] + 5 * ((w - 1) // 4), tpl.balance["minutes_full"])
            if self.hold_volume:
                minutes = bal_minutes or tpl.balance["minutes_start"]
            if (level, vol) not in c_imp:
                imp = self.impact_exercises(level, vol)
                c_imp[level, vol] = (imp, _session_oi(imp),
                                     sum(x["impacts"] for x in imp if x["impact_level"] >= 2))
            res_key = self.resistance_mode(w, ph)
            if res_key not in c_res:
                res = self.resistance_exercises(w, ph)[0]
                c_res[res_key] = (res, _session_oi(res), prescribed_pct_1rm(res))
            if (b_stage, minutes) not in c_bal:
                bal = self.balance_exercises(w, minutes)
                c_bal[b_stage, minutes] = (bal, _session_oi(bal))
            imp, oi_i, n_imp = c_imp[level, vol]
            res, oi_r, pct_r = c_res[res_key]
            bal, oi_b = c_bal[b_stage, minutes]
            if self.carer_led:  # every session with a clinician or the carer present
                for x in (*imp, *res, *bal):
                    x["supervised"] = True
            used_l23 = used_l23 or n_imp > 0
            self.week_lists.append((imp, res, bal))   # read by prescribe.planning.why
            sup_i, sup_r, sup_b = (any(x["supervised"] for x in lst) for lst in (imp, res, bal))
            sessions = []
            for d in sorted(set(impact_days) | set(bal_days) | set(res_days)):
                if d in impact_days:
                    has_bal = d in bal_days
                    exs = ((bal, imp) if self.falls else (imp, bal)) if has_bal else imp
                    sessions.append({"day": d, "kind": "mixed" if has_bal and bal else "impact",
                                     "exercises": exs, "impacts": n_imp,
                                     "osteogenic_index": round(oi_i + (oi_b if has_bal else 0.0), 2),
                                     "supervised": sup_i or (has_bal and sup_b)})
                elif d in bal_days:
                    sessions.append({"day": d, "kind": "balance", "exercises": bal, "impacts": 0,
                                     "osteogenic_index": oi_b, "supervised": sup_b})
                if d in res_days:
                    sessions.append({"day": d, "kind": "resistance", "exercises": res, "impacts": 0,
                                     "osteogenic_index": oi_r, "supervised": sup_r})
            weeks.append({
                "week": w,
                "impact_level": max([x["impact_level"] for x in (*imp, *res, *bal)], default=0),
                "impacts_per_session": n_imp,
                "reassessment": w in review,
                "sessions": sessions,
                "phase": f"{'balance first; ' if self.falls and w <= BALANCE_FIRST_WEEKS else ''}{text}; "
                         f"resistance {ph.name}",
                "impact_phase": text,
                "resistance_phase": ph.name,
                "weak_window": weak,
                "step_up": step_up,
                "resistance_intensity_pct_1rm": pct_r,
                "weekly_osteogenic_index": round(sum(s["osteogenic_index"] for s in sessions), 2),
                "impact_volume": vol,
                "impact_volume_unit": {0: "reps", 1: "minutes"}.get(level, "impacts"),
                "balance_minutes_per_session": minutes,
            })
        used = {"impact": [v[0] for v in c_imp.values()], "resistance": [v[0] for v in c_res.values()],
                "balance": [v[0] for v in c_bal.values()]}
        return weeks, used, used_l23
