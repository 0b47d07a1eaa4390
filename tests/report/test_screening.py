"""Screening outputs: segments.geojson (RFC 7946), segments.csv, report.html, atomic folder."""

from __future__ import annotations

import csv
import json
from html.parser import HTMLParser

import numpy as np
import pytest
from pyproj import Transformer

import divides
from divides.assess.screen import screen
from divides.errors import OutputError

DEMO = "demo/uplands.tif"


@pytest.fixture(scope="module")
def screening():
    return screen(divides.read_dem(DEMO), theta=0.45)


def test_outputs_follow_the_screen_contract(screening, tmp_path):
    out = screening.write(tmp_path / "screen")
    gj = json.loads((out / "segments.geojson").read_text(), parse_constant=lambda c: pytest.fail(c))
    # RFC 7946: a FeatureCollection without a 'crs' member, lon/lat positions in range
    assert gj["type"] == "FeatureCollection" and "crs" not in gj
    assert len(gj["features"]) == len(screening.segments) > 0
    to_dem = Transformer.from_crs("EPSG:4326", screening.dem.crs.to_wkt(), always_xy=True)
    for feat, seg in zip(gj["features"], screening.segments):
        assert feat["geometry"]["type"] == "LineString"
        coords = np.array(feat["geometry"]["coordinates"])
        assert np.all(np.abs(coords[:, 0]) <= 180) and np.all(np.abs(coords[:, 1]) <= 90)
        # pyproj maps the first vertex back to the segment's first point within a metre
        x, y = to_dem.transform(coords[0, 0], coords[0, 1])
        assert abs(x - seg["line"].x[0]) < 1.0 and abs(y - seg["line"].y[0]) < 1.0
        props = feat["properties"]
        # stable property names of the design's screen contract
        assert set(props) >= {"rank", "instability", "confidence", "length_m", "basins", "moves_toward_basin",
                              "motion_azimuth_deg"}
        assert 0.0 <= props["instability"] <= 1.0 and 0.0 <= props["confidence"] <= 1.0
        assert props["moves_toward_basin"] in (None, *props["basins"])
        az = props["motion_azimuth_deg"]
        assert (az is None) == (props["moves_toward_basin"] is None) and (az is None or 0 <= az < 360)
    ranks = [f["properties"]["rank"] for f in gj["features"]]
    assert ranks == list(range(1, len(ranks) + 1))
    inst = [f["properties"]["instability"] for f in gj["features"]]
    assert inst == sorted(inst, reverse=True)
    with open(out / "segments.csv", newline="") as fh:
        rows = list(csv.DictReader(fh))
    assert len(rows) == len(ranks)
    assert {"rank", "instability", "confidence", "length_m", "moves_toward_basin", "motion_azimuth_deg"} <= set(rows[0])
    parser = HTMLParser()
    text = (out / "report.html").read_text()
    parser.feed(text)
    assert "licensed professionals" in text and "http://" not in text and "https://" not in text
    assert (out / "figures" / "regional_map.png").stat().st_size > 10_000


def test_existing_folder_refused_and_failure_leaves_nothing(screening, tmp_path, monkeypatch):
    out = screening.write(tmp_path / "s")
    with pytest.raises(OutputError, match="already exists"):
        screening.write(out)
    screening.write(out, overwrite=True)
    from divides.report import screening as mod

    monkeypatch.setattr(mod, "regional_map", lambda result: (_ for _ in ()).throw(RuntimeError("boom")))
    with pytest.raises(RuntimeError):
        screening.write(tmp_path / "t")
    assert not (tmp_path / "t").exists()
    assert [p.name for p in tmp_path.iterdir() if p.name.startswith(".")] == []
