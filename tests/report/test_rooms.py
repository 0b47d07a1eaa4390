"""Rooms: the analysis never imports the report room; writing goes through ``divides.write``.

The rule is DESIGN.md's ("imports go downstream only: io -> terrain ->
profiles -> assess -> report"; "Assessment is data: writing it is the report
room's job"), checked in a fresh interpreter (the source check is tests/test_rooms.py).
"""

from __future__ import annotations

import json
import subprocess
import sys

import divides
import divides.report.writer as writer


def test_importing_the_analysis_loads_no_report_module():
    code = ("import sys, json, divides.assess.assessment, divides.assess.screen; "
            "print(json.dumps(sorted(m for m in sys.modules if m.startswith('divides.report'))))")
    proc = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True, timeout=120)
    assert json.loads(proc.stdout) == []


def test_divides_write_is_the_report_rooms_writer():
    assert divides.write is writer.write


def test_result_write_goes_through_the_public_package(written):
    # the session fixture wrote the demo with result.write(...): the provenance only the report room adds is there
    _, out, _ = written
    summary = json.loads((out / "summary.json").read_text(encoding="utf-8"))
    assert summary["provenance"]["dem_file"] == "uplands.tif"


def test_divides_write_refuses_other_objects(tmp_path):
    import pytest

    with pytest.raises(TypeError, match="divides.write"):
        divides.write(object(), tmp_path / "out")
    assert not (tmp_path / "out").exists()
