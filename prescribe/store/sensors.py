"""Worn-sensor summaries (revision 0005)."""

from __future__ import annotations

import json

from sqlalchemy import select

from ..errors import InputError
from . import models as m
from .engine import StoreBase, now_utc
from .rows import _audit, _clinician, _dumps, _person


class SensorsMixin(StoreBase):
    """Worn-sensor summaries."""

    def add_sensor_summary(self, patient_id: str, summary: dict, clinician: str = "") -> int:
        """Store the summary of one worn-sensor recording with the person; returns its id.

        Only the summary is stored (counts per band and per day, the planned comparison),
        never the raw signal.
        """
        if not isinstance(summary, dict) or "days" not in summary:
            raise InputError.single("summary", summary, "a sensor summary as printed by `prescribe sensor`")
        clinician = _clinician(clinician, required=False)
        summary_json = _dumps(summary, "summary")
        at = now_utc()
        with self._write() as conn:
            _person(conn, patient_id, lock=True)
            sid = conn.execute(m.sensor_summaries.insert().values(
                patient_id=patient_id, created=at, clinician=clinician, file_name=str(summary.get("file") or ""),
                recorded_from=summary.get("start"), recorded_to=summary.get("end"),
                summary_json=summary_json)).inserted_primary_key[0]
            _audit(conn, at, "sensor_summary_saved", patient_id, clinician,
                   {"sensor_summary_id": sid, "file": summary.get("file"), "start": summary.get("start")})
        return int(sid)

    def sensor_summaries(self, patient_id: str) -> list[dict]:
        """Every stored sensor summary of one person, oldest first."""
        with self._read() as conn:
            _person(conn, patient_id)
            rows = conn.execute(select(m.sensor_summaries).where(m.sensor_summaries.c.patient_id == patient_id)
                                .order_by(m.sensor_summaries.c.created, m.sensor_summaries.c.id)).all()
        return [{"sensor_summary_id": r.id, "created": r.created, "clinician": r.clinician,
                 "summary": json.loads(r.summary_json)} for r in rows]
