"""Fixtures of the command-line tests."""

from __future__ import annotations

import pytest


@pytest.fixture(autouse=True)
def _cheap_svg(monkeypatch):
    """Skip drawing the SVG twins of the figures: seconds per run, and tested in tests/report.

    The command-line tests check options, folders, messages and exit codes;
    the SVG files are still written (a minimal valid document) so every file
    list stays the same. tests/report/test_writer.py checks the real ones.
    """
    from divides.report import figures

    monkeypatch.setattr(figures, "to_svg", lambda fig: b'<?xml version="1.0"?><svg xmlns="http://www.w3.org/2000/svg"/>')
