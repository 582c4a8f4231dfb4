"""The clinic record store (SQLAlchemy 2 over SQLite by default; PostgreSQL by URL).

>>> from prescribe.store import open_store
>>> store = open_store()          # PRESCRIBE_DB, or the default location
>>> store.save_patient(record, screening, clinician="AB")

See docs/store.md for the location, the settings and the bundle format.
"""

from .api import HEAD_REVISION, Store, now_utc, open_store, plan_summary
from .bundle import BUNDLE_FORMAT_VERSION, parse_bundle

__all__ = ["Store", "open_store", "parse_bundle", "plan_summary", "now_utc", "HEAD_REVISION",
           "BUNDLE_FORMAT_VERSION"]
