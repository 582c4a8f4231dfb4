"""Shared fixtures.  Browser fixtures live in tests/browser/conftest.py only."""

from __future__ import annotations

import os
import subprocess
import sys
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[1]
ARTIFACTS = ROOT / "test-artifacts"


@pytest.fixture
def artifacts_dir() -> Path:
    """Where tests keep files a reviewer can open (screenshots, rendered pages)."""
    ARTIFACTS.mkdir(exist_ok=True)
    return ARTIFACTS


@pytest.fixture
def tmp_db(tmp_path, monkeypatch) -> str:
    """A fresh store for one test, set through PRESCRIBE_DB."""
    path = tmp_path / "store.db"
    monkeypatch.setenv("PRESCRIBE_DB", str(path))
    return str(path)


def run_cli(*args: str, input: str | None = None, env: dict | None = None, cwd=None):
    """Run the real ``prescribe`` entry point in a subprocess."""
    full_env = dict(os.environ)
    if env:
        full_env.update(env)
    exe = Path(sys.executable).with_name("prescribe")
    cmd = [str(exe), *args] if exe.exists() else [sys.executable, "-m", "prescribe.cli", *args]
    return subprocess.run(cmd, input=input, capture_output=True, text=True, env=full_env, cwd=cwd, timeout=300)


@pytest.fixture
def cli():
    return run_cli
