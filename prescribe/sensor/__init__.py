"""Delivered dose from a worn sensor: read a recording, count its impacts, set them
beside the plan.

>>> from prescribe.sensor import summarise_file
>>> summary = summarise_file("week.csv", body_mass_kg=64)
>>> summary["impacts_by_band"], summary["days"][0]["osteogenic_index"]

* :mod:`.impacts` - the counting formulas (pure, vectorised, with their sources);
* :mod:`.readers` - the CSV reader and the vendor readers (optional extra);
* :mod:`.summary` - the chunked counter (bounded memory);
* :mod:`.compare` - planned against delivered, day by day.

See docs/sensors.md.
"""

from __future__ import annotations

import os
from datetime import datetime, timezone
from typing import Callable

from ..errors import InputError
from ..plan_schema import Plan
from .readers import FORMATS, SensorReaderMissing, detect_format, open_recording
from .summary import DEFAULT_BODY_MASS_KG, SITES, ImpactCounter

__all__ = ["summarise_file", "summarise_for_person", "parse_start", "FORMATS", "SITES", "SensorReaderMissing", "detect_format",
           "DEFAULT_BODY_MASS_KG"]


def parse_start(value: str | None) -> float | None:
    """``YYYY-MM-DD`` or ``YYYY-MM-DDTHH:MM[:SS]`` (UTC unless an offset is given) as Unix time."""
    if value is None or value == "":
        return None
    try:
        moment = datetime.fromisoformat(str(value))
    except ValueError:
        raise InputError.single("--start", value, "a date and time as YYYY-MM-DD or YYYY-MM-DDTHH:MM") from None
    if moment.tzinfo is None:
        moment = moment.replace(tzinfo=timezone.utc)
    return moment.timestamp()


def summarise_file(path: str | os.PathLike, fmt: str | None = None, *, site: str = "hip",
                   body_mass_kg: float | None = None, start: str | float | None = None,
                   progress: Callable[[float], None] | None = None) -> dict:
    """Count a recording's impacts per band and per day (see docs/sensors.md).

    Parameters
    ----------
    path : path
        A CSV (time_s, x_g, y_g, z_g), an Axivity .cwa or a GENEActiv .bin file.
    fmt : {"csv", "cwa", "bin"}, optional
        The file's format (default: from its suffix).
    site : {"hip", "wrist"}
        Where the sensor was worn.
    body_mass_kg : float, optional
        The wearer's body mass [kg] (default 70 kg, said in the notes).
    start : str or float, optional
        Start of a recording whose times are relative (ISO date-time or Unix time).
    progress : callable, optional
        Called with the share read so far (0-1).
    """
    if site not in SITES:
        raise InputError.single("--site", site, "one of " + ", ".join(SITES))
    start_s = start if isinstance(start, (int, float)) or start is None else parse_start(start)
    mass = DEFAULT_BODY_MASS_KG if body_mass_kg is None else body_mass_kg
    recording = open_recording(path, fmt, progress=progress)
    counter = ImpactCounter(mass, site, start_epoch_s=start_s, source=os.path.basename(str(path)))
    for t, acc in recording.chunks:
        counter.feed(t, acc)
    summary = counter.finish(recording.declared_rate_hz)
    if start_s is not None and not counter.relative:
        summary["notes"].append("The file's times are clock times (Unix time): the start given was not needed "
                                "and was not used.")
    if body_mass_kg is None and site == "hip":
        summary["notes"].append(f"No body mass given: {DEFAULT_BODY_MASS_KG:g} kg was assumed for the force "
                                "estimate (give --body-mass-kg, or --patient).")
    return {"file": os.path.basename(str(path)), "format": recording.format, **summary}


def summarise_for_person(path: str | os.PathLike, fmt: str | None = None, *, site: str = "hip",
                         body_mass_kg: float | None = None, start: str | float | None = None,
                         plan: Plan | None = None, plan_saved_at: str | None = None,
                         progress: Callable[[float], None] | None = None) -> dict:
    """:func:`summarise_file`, then the plan's figures for the same days (when there is a plan).

    The plan's ``start_date`` dates its weeks; a plan without one is dated from
    ``plan_saved_at`` (the day its version was stored), said in ``person_notes``.  A
    recording with relative times and no ``start`` is taken to begin on the program's
    first day, also said.  Returns the summary with ``plan`` (see
    :func:`prescribe.sensor.compare.compare_with_plan`), the planned figures beside each
    day and ``person_notes``.
    """
    from .compare import compare_with_plan, lift_plan_figures, program_start

    notes: list[str] = []
    start_day = None
    if plan is not None:
        start_day, note = program_start(plan, plan_saved_at)
        if note:
            notes.append(note)
    summary = summarise_file(path, fmt, site=site, body_mass_kg=body_mass_kg, start=start, progress=progress)
    if summary.get("start") is None and start_day is not None and start is None:
        summary = summarise_file(path, fmt, site=site, body_mass_kg=body_mass_kg, start=start_day.isoformat())
        notes.append(f"The file's times are relative and no start was given: the recording was taken to begin on "
                     f"the program's start date, {start_day.isoformat()} 00:00 UTC.")
    if plan is not None and site != "hip":
        notes.append("Planned against delivered needs a recording at the hip: the program's impacts are forces "
                     "the wrist's accelerations do not estimate, so no comparison was made.")
        plan = None
    if plan is None:
        summary["plan"] = None
    else:
        summary["plan"] = compare_with_plan(summary, plan, start_day)
        summary["plan"]["program_created"] = plan.created
        lift_plan_figures(summary)
    summary["person_notes"] = notes
    return summary
