"""The clinic app (ipywidgets and bqplot): the only package that imports them.

``ClinicSession`` (state and actions, no widgets) lives in :mod:`prescribe.ui.session`;
``ClinicApp`` (the widgets) in :mod:`prescribe.ui.app` (assembled from the section modules).  Both are imported lazily so
``import prescribe.ui.session`` never loads ipywidgets.
"""

from __future__ import annotations

__all__ = ["ClinicApp", "ClinicSession", "notebook_json"]


def __getattr__(name: str):
    if name == "ClinicApp":
        from .app import ClinicApp
        return ClinicApp
    if name == "ClinicSession":
        from .session import ClinicSession
        return ClinicSession
    raise AttributeError(name)


def notebook_json() -> dict:
    """The thin notebook Voila serves (apps/clinic.ipynb holds the same cells)."""
    cells = [
        "# The clinic app: the widgets and their logic live in prescribe.ui.\n"
        "from prescribe.ui import ClinicApp",
        "ClinicApp.from_environment().widget",
    ]
    return {
        "cells": [{"cell_type": "code", "execution_count": None, "id": f"cell-{i}", "metadata": {},
                   "outputs": [], "source": src} for i, src in enumerate(cells)],
        "metadata": {"kernelspec": {"display_name": "Python 3", "language": "python", "name": "python3"},
                     "language_info": {"name": "python"}},
        "nbformat": 4, "nbformat_minor": 5,
    }
