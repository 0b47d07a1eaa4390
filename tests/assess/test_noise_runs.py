"""The DEM-noise re-runs of the robustness check, run on a thread beside the main pass.

Reference: the same re-runs made one after the other once the main pass is done (the serial
order every earlier version used); common practice for checking a concurrent path.
"""

from __future__ import annotations

import threading

import pytest

import divides
from divides.assess import assessment
from divides.errors import SideError
from divides.model import scenarios as S

CELL = 100.0
OPTIONS = {"closed_edges": ("north", "south"), "n_noise_runs": 2, "dem_error_m": 0.5, "n_bootstrap": 100}


@pytest.fixture(scope="module")
def ridge():
    return S.symmetric_divide((60, 120), seed=3).run(duration=1e6, dt=5e4).final


def _serial(monkeypatch):
    # a tiled-routing plan keeps the noise runs out of the main pass (they then start when the
    # robustness check asks for them, and it waits); routing itself reads its own module's plan
    monkeypatch.setattr(assessment, "active_plan", lambda: object())


@pytest.mark.parametrize("theta", [0.45, "auto"])
def test_noise_runs_beside_the_main_pass_equal_the_serial_runs(ridge, monkeypatch, theta):
    beside = divides.assess(ridge, "west", "east", theta=theta, **OPTIONS)
    _serial(monkeypatch)
    serial = divides.assess(ridge, "west", "east", theta=theta, **OPTIONS)
    assert sum(r["change"].startswith("DEM noise") for r in beside.robustness) == 2
    assert serial.robustness == beside.robustness
    assert serial.summary == beside.summary


def test_a_failing_main_pass_stops_the_noise_runs(ridge, monkeypatch):
    started = []

    def fail(*args, **kwargs):
        started.append(any(t.name.startswith("divides-noise-runs") for t in threading.enumerate()))
        raise ValueError("no divide line long enough to sample")

    monkeypatch.setattr(assessment, "sample_divide", fail)
    with pytest.raises(SideError, match="too short to sample"):
        divides.assess(ridge, "west", "east", **OPTIONS)
    assert started and started[0]  # the runs had started before the main pass failed
    assert not any(t.name.startswith("divides-noise-runs") for t in threading.enumerate())
