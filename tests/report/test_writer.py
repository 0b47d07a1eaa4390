"""The output folder: every file is there and parses, and writing is all-or-nothing."""

from __future__ import annotations

import json
import os
from pathlib import Path

import pytest
from PIL import Image

from divides.assess.verdict import CAUTION
from divides.errors import OutputError
from divides.report import figures
from divides.report.writer import STAGES, write_assessment


def _reject_constant(name: str):
    raise ValueError(f"non-standard JSON constant {name}")


def _strict_json(path: Path):
    # RFC 8259 has no NaN/Infinity; Python's json accepts them unless parse_constant refuses (stdlib docs)
    return json.loads(path.read_text(encoding="utf-8"), parse_constant=_reject_constant)


def test_every_output_exists_and_parses(written) -> None:
    result, out, _ = written
    # the file list of the output contract (DESIGN.md, "The output contract" and issue 7 §2)
    for name in ("summary.json", "verdict.txt", "report.html"):
        assert (out / name).is_file(), name
    for sub, suffix in (("figures", ".png"), ("layers", ".geojson"), ("rasters", ".tif"), ("tables", ".csv")):
        files = sorted((out / sub).glob(f"*{suffix}"))
        assert files, sub
    summary = _strict_json(out / "summary.json")
    # schema name and top-level keys from DESIGN.md's contract
    assert summary["schema"] == "divides.assessment/1"
    for key in ("dem", "parameters", "sides", "divide", "profiles", "contrasts", "knickpoints", "verdict"):
        assert key in summary
    assert summary["verdict"]["moves_toward"] in ("a", "b", "stable", "undetermined")
    assert 0.0 <= summary["verdict"]["confidence"] <= 1.0
    # the file is the in-memory document, plus its provenance and with the DEM named by its file name
    memory = json.loads(json.dumps(result.summary))
    memory["dem"]["path"] = "uplands.tif"
    assert {k: v for k, v in summary.items() if k != "provenance"} == memory
    assert list(summary)[:2] == ["schema", "provenance"]
    for geojson in (out / "layers").glob("*.geojson"):
        _strict_json(geojson)


def test_verdict_text_carries_the_verdict_and_the_caution(written) -> None:
    result, out, _ = written
    text = (out / "verdict.txt").read_text(encoding="utf-8")
    assert result.verdict.text.splitlines()[0] in text
    assert CAUTION in text
    # the cautions the project requires, in words (project rules)
    lowered = text.lower()
    assert "screening" in lowered and "field" in lowered and "licensed professionals" in lowered
    assert f"{result.verdict.confidence:.2f}" in text


def test_verdict_text_header_rounds_the_rate_to_its_interval_and_says_why_one_is_withheld(written) -> None:
    # Numbers are rounded to what their interval supports (common practice: an interval spanning a factor of
    # ten supports two significant figures); a withheld rate says why, not that no input was given.
    import copy

    from divides.report.text import verdict_text

    result, _, _ = written
    doc = copy.deepcopy(result.summary)
    doc["verdict"]["rate_mm_per_yr"] = {"low": 0.16969, "best": 0.57547, "high": 1.8489}
    assert "Rate:        0.58 mm/yr (95 % interval 0.17 to 1.8 mm/yr)" in verdict_text(result, summary=doc)
    doc["verdict"]["rate_mm_per_yr"] = None
    doc["verdict"]["rate_withheld"] = "the verdict has no direction"
    assert "Rate:        withheld (the verdict has no direction)" in verdict_text(result, summary=doc)
    doc["verdict"]["rate_withheld"] = None
    assert "Rate:        not computed" in verdict_text(result, summary=doc)


def test_figures_are_pngs_of_report_size(written) -> None:
    _, out, _ = written
    pngs = sorted((out / "figures").glob("*.png"))
    assert {p.stem for p in pngs} == set(figures.FIGURES)
    for path in pngs:
        with Image.open(path) as img:  # PIL decodes the file independently of matplotlib
            img.verify()
        with Image.open(path) as img:
            assert img.format == "PNG"
            width, height = img.size
        # a page-width figure at screen-to-print resolution (common practice): 600-2500 px a side
        assert 600 <= width <= 2500 and 300 <= height <= 2500, (path.name, img.size)


def test_progress_reports_each_stage_once_in_order(written) -> None:
    _, _, stages = written
    assert stages == list(STAGES)
    assert sum(s.startswith("figure: ") for s in stages) == len(figures.FIGURES)


def _listing(folder: Path) -> set[str]:
    return {p.name for p in folder.iterdir()}


def _broken(result):
    raise RuntimeError("injected failure while drawing")


def test_failure_mid_write_leaves_nothing(demo_result, tmp_path: Path, monkeypatch) -> None:
    monkeypatch.setattr(figures, "contrast_figure", _broken)
    stages: list[str] = []
    before = _listing(tmp_path)
    with pytest.raises(RuntimeError, match="injected"):
        write_assessment(demo_result, tmp_path / "out", progress=stages.append)
    assert "tables" in stages and "figure: map" in stages  # files had been written when it failed
    assert not (tmp_path / "out").exists()
    assert _listing(tmp_path) == before  # no temporary folder left behind


def test_interruption_leaves_nothing(demo_result, tmp_path: Path) -> None:
    def interrupt(stage: str) -> None:
        if stage == "tables":
            raise KeyboardInterrupt

    with pytest.raises(KeyboardInterrupt):
        write_assessment(demo_result, tmp_path / "out", progress=interrupt)
    assert _listing(tmp_path) == set()


def test_existing_folder_refused_then_replaced_with_overwrite(written, tmp_path: Path, monkeypatch) -> None:
    result, first, _ = written
    out = tmp_path / "out"
    out.mkdir()
    (out / "summary.json").write_text((first / "summary.json").read_text(encoding="utf-8"), encoding="utf-8")
    (out / "stale.txt").write_text("from an earlier run", encoding="utf-8")
    with pytest.raises(OutputError, match="already exists") as info:
        write_assessment(result, out)
    assert str(out) in str(info.value)
    assert (out / "stale.txt").exists()

    # a failed overwrite keeps the earlier outputs untouched
    monkeypatch.setattr(figures, "slope_area_figure", _broken)
    with pytest.raises(RuntimeError, match="injected"):
        write_assessment(result, out, overwrite=True)
    assert (out / "stale.txt").exists()
    assert _listing(tmp_path) == {"out"}
    monkeypatch.undo()

    write_assessment(result, out, overwrite=True)
    assert not (out / "stale.txt").exists()
    assert (out / "report.html").is_file()
    assert _listing(tmp_path) == {"out"}  # the replaced folder is gone too


def test_overwrite_never_replaces_a_foreign_folder(demo_result, tmp_path: Path) -> None:
    out = tmp_path / "my documents"
    out.mkdir()
    (out / "notes.txt").write_text("precious", encoding="utf-8")
    with pytest.raises(OutputError, match="not an earlier divides output"):
        write_assessment(demo_result, out, overwrite=True)
    assert (out / "notes.txt").read_text(encoding="utf-8") == "precious"


def test_unwritable_location_names_the_path(demo_result, tmp_path: Path) -> None:
    blocker = tmp_path / "a-file"
    blocker.write_text("not a folder", encoding="utf-8")
    target = blocker / "out"  # a folder cannot be made inside a regular file (POSIX ENOTDIR)
    with pytest.raises(OutputError) as info:
        write_assessment(demo_result, target)
    assert str(target) in str(info.value)
    assert _listing(tmp_path) == {"a-file"}


def test_existing_file_refused_even_with_overwrite(demo_result, tmp_path: Path) -> None:
    target = tmp_path / "out"
    target.write_text("a file", encoding="utf-8")
    with pytest.raises(OutputError, match="not a folder"):
        write_assessment(demo_result, target, overwrite=True)
    assert target.read_text(encoding="utf-8") == "a file"


def test_output_folder_follows_the_umask(written) -> None:
    _, out, _ = written
    umask = os.umask(0)
    os.umask(umask)
    # a folder made by mkdir gets 0o777 less the umask (POSIX mkdir(2))
    assert out.stat().st_mode & 0o777 == 0o777 & ~umask


def test_staged_output_is_all_or_nothing(tmp_path: Path) -> None:
    from divides.report import staged_output

    with pytest.raises(ValueError):
        with staged_output(tmp_path / "out") as folder:
            (folder / "part.txt").write_text("half", encoding="utf-8")
            raise ValueError("stop")
    assert _listing(tmp_path) == set()
    with staged_output(tmp_path / "out") as folder:
        (folder / "whole.txt").write_text("all", encoding="utf-8")
        assert not (tmp_path / "out").exists()  # nothing visible until the block ends
    assert _listing(tmp_path) == {"out"} and _listing(tmp_path / "out") == {"whole.txt"}


def test_provenance_names_the_tool_the_time_and_the_dem(written) -> None:
    import datetime as dt
    import hashlib
    from importlib.metadata import version

    _, out, _ = written
    prov = _strict_json(out / "summary.json")["provenance"]
    assert set(prov) == {"tool_version", "created_utc", "command", "dem_file", "dem_sha256"}
    assert prov["tool_version"] == version("divides")  # the installed distribution's metadata
    # ISO 8601 in UTC ("Z"), parsed by the standard library, made moments ago
    created = dt.datetime.fromisoformat(prov["created_utc"].replace("Z", "+00:00"))
    assert created.tzinfo is not None and abs(dt.datetime.now(dt.timezone.utc) - created) < dt.timedelta(hours=1)
    assert prov["command"] is None  # written from Python, not from the command line
    assert prov["dem_file"] == "uplands.tif"
    demo = Path(__file__).resolve().parents[2] / "demo" / "uplands.tif"
    assert prov["dem_sha256"] == hashlib.sha256(demo.read_bytes()).hexdigest()  # hashlib as the reference
    # the same in the report's footer and at the end of verdict.txt
    page = (out / "report.html").read_text(encoding="utf-8")
    footer = page[page.index('<footer id="provenance">'):]
    assert prov["dem_sha256"] in footer and prov["created_utc"] in footer and prov["tool_version"] in footer
    assert prov["dem_sha256"] in (out / "verdict.txt").read_text(encoding="utf-8")


def test_no_output_holds_a_folder_path(written) -> None:
    """No file written carries the folders of the DEM or of the outputs (a client's folder structure)."""
    _, out, _ = written
    demo_dir = str(Path(__file__).resolve().parents[2] / "demo")
    needles = [demo_dir.encode(), str(out.parent).encode()]
    files = [p for p in out.rglob("*") if p.is_file()]
    assert len(files) > 20  # every kind of output (json, txt, html, png, svg, geojson, tif, csv)
    for path in files:
        data = path.read_bytes()
        for needle in needles:
            assert needle not in data, (path.name, needle)


def test_figures_are_200_dpi_png_and_svg(written) -> None:
    _, out, _ = written
    pngs = sorted((out / "figures").glob("*.png"))
    svgs = sorted((out / "figures").glob("*.svg"))
    assert [p.stem for p in pngs] == [p.stem for p in svgs] and pngs
    for png in pngs:
        with Image.open(png) as img:  # Pillow reads the pHYs chunk as dots per inch
            assert img.info["dpi"] == pytest.approx((200, 200), abs=0.1)
    for svg in svgs:
        head = svg.read_bytes()[:400]
        assert b"<svg" in svg.read_bytes()[:2000] and head.startswith(b"<?xml")  # SVG 1.1 prolog
