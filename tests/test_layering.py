"""Layering: the domain and storage layers never pull in the widget or app stack."""

from __future__ import annotations

import importlib.util
import subprocess
import sys

import pytest

DOMAIN = ["prescribe.records", "prescribe.errors", "prescribe.rules", "prescribe.screening",
          "prescribe.batch_io", "prescribe.catalogue", "prescribe.dose", "prescribe.mechanics",
          "prescribe.planner", "prescribe.handout", "prescribe.store", "prescribe.sensor",
          "prescribe.sensor.impacts", "prescribe.sensor.summary", "prescribe.sensor.compare"]
FORBIDDEN = ("ipywidgets", "bqplot", "voila")


def _exists(name: str) -> bool:
    try:
        return importlib.util.find_spec(name) is not None
    except ModuleNotFoundError:
        return False


@pytest.mark.parametrize("module", [m for m in DOMAIN if _exists(m)])
def test_domain_module_does_not_import_widgets(module):
    code = (f"import sys, {module}\n"
            f"bad = sorted(m for m in sys.modules if m.split('.')[0] in {FORBIDDEN!r})\n"
            "print(','.join(bad))")
    proc = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, timeout=120)
    assert proc.returncode == 0, proc.stderr
    assert proc.stdout.strip() == "", f"{module} imports {proc.stdout.strip()}"


def test_core_modules_exist():
    # The engine's own modules must always be checked, not skipped.
    for module in ("prescribe.records", "prescribe.rules", "prescribe.screening"):
        assert _exists(module)
