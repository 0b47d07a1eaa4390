"""Bad inputs a real user could give ``divides assess`` (and ``divides demo``).

The rule every case is held to comes from the project brief, not from the
code: exit code 2, exactly one line on stderr that starts with
``divides: error:`` and names what is wrong, no traceback, nothing on stdout,
and no output left behind (no --out folder, no temporary folder beside it; an
existing folder untouched). Inputs are written here with plain rasterio
(``write_geotiff`` in conftest.py), never with divides.

Most cases run through ``divides.cli.app.run`` (what the console script calls);
a few go through a real interpreter so the status a shell sees is checked too.
"""

from __future__ import annotations

import re
import subprocess
import sys
from collections.abc import Callable
from pathlib import Path

import numpy as np
import pytest
from affine import Affine

from divides.cli.app import run

UPLANDS = Path(__file__).resolve().parents[2] / "demo" / "uplands.tif"
CRS = "EPSG:32630"
TRANSFORM = Affine(30.0, 0.0, 500_000.0, 0.0, -30.0, 4_000_000.0)  # 30 m cells, north-up


def _ridge(rows: int = 40, cols: int = 60, crest: int = 30, steep: float = 2.0, seed: int = 0) -> np.ndarray:
    """A north-south ridge between the west and east edges, with noise so that valleys can form."""
    c = np.arange(cols, dtype=np.float64)
    profile = np.minimum(c * steep, (cols - 1 - c) * steep * crest / (cols - 1 - crest))
    rng = np.random.default_rng(seed)
    return (100.0 + profile[None, :] + rng.random((rows, cols))).astype(np.float32)


class Inputs:
    """Writes the files of one case into ``tmp/in``; the outputs go to ``tmp/work``."""

    def __init__(self, write_geotiff: Callable[..., Path], tmp_path: Path) -> None:
        self._write = write_geotiff
        self.dir = tmp_path
        self.work = tmp_path / "work"
        self.work.mkdir()
        self.out = self.work / "out"

    def tif(self, name: str, data: np.ndarray, **kw) -> str:
        kw.setdefault("crs", CRS)
        kw.setdefault("transform", TRANSFORM)
        return str(self._write(name, data, **kw))

    def ridge(self) -> str:
        return self.tif("ridge.tif", _ridge())


def _assess(dem: str, *extra: str, sides: tuple[str, str] = ("west", "east")) -> list[str]:
    return ["assess", dem, "--side-a", sides[0], "--side-b", sides[1], "--no-robustness", *extra]


def _screen(dem: str, *extra: str) -> list[str]:
    return ["screen", dem, "--theta", "0.45", "--no-forward-run", *extra]


def _forecast(dem: str, *extra: str) -> list[str]:
    return ["forecast", dem, "--side-a", "west", "--side-b", "east", "--erosion-rate-a", "0.7", "--years", "1e4",
            *extra]


# Each case: (id, build(inputs) -> argv, words the one line must contain). The words come
# from the brief's demand that the line says what is wrong (the option, file or value).
def _truncated(i: Inputs) -> list[str]:
    path = i.dir / "truncated.tif"
    data = UPLANDS.read_bytes()
    path.write_bytes(data[: len(data) // 2])  # a download cut short
    return _assess(str(path), "--out", str(i.out))


def _corrupt(i: Inputs) -> list[str]:
    good = Path(i.ridge())
    data = bytearray(good.read_bytes())
    data[:4] = b"XXXX"  # the TIFF header destroyed
    good.write_bytes(bytes(data))
    return _assess(str(good), "--out", str(i.out))


def _text(i: Inputs) -> list[str]:
    path = i.dir / "heights.tif"
    path.write_text("x,y,z\n1,2,3\n")
    return _assess(str(path), "--out", str(i.out))


def _runoff_wrong_shape(i: Inputs) -> list[str]:
    runoff = i.tif("runoff.tif", np.ones((10, 12), np.float32))
    return _assess(i.ridge(), "--runoff", runoff, "--out", str(i.out))


def _runoff_negative(i: Inputs) -> list[str]:
    runoff = i.tif("runoff.tif", np.full((40, 60), -1.0, np.float32))
    return _assess(i.ridge(), "--runoff", runoff, "--out", str(i.out))


def _runoff_other_place(i: Inputs) -> list[str]:
    runoff = i.tif("runoff.tif", np.ones((40, 60), np.float32), transform=TRANSFORM @ Affine.translation(7, 0))
    return _assess(i.ridge(), "--runoff", runoff, "--out", str(i.out))


def _existing_out(i: Inputs) -> list[str]:
    i.out.mkdir()
    (i.out / "notes.txt").write_text("mine")
    return _assess(i.ridge(), "--out", str(i.out))


def _overwrite_foreign(i: Inputs) -> list[str]:
    i.out.mkdir()
    (i.out / "thesis.docx").write_text("years of work")
    return _assess(i.ridge(), "--out", str(i.out), "--overwrite")


def _out_is_file(i: Inputs) -> list[str]:
    i.out.write_text("a file, not a folder")
    return _assess(i.ridge(), "--out", str(i.out))


def _out_under_file(i: Inputs) -> list[str]:
    blocker = i.work / "report.pdf"
    blocker.write_text("a file")
    return _assess(i.ridge(), "--out", str(blocker / "out"))


def _nodata_point(i: Inputs) -> list[str]:
    z = _ridge()
    z[:10, :10] = -9999.0
    dem = i.tif("holes.tif", z, nodata=-9999.0)
    x, y = TRANSFORM.c + 3.5 * TRANSFORM.a, TRANSFORM.f + 3.5 * TRANSFORM.e  # centre of a nodata cell
    return _assess(dem, "--out", str(i.out), sides=(f"{x},{y}", "east"))


def _collared(i: Inputs) -> str:
    """The ridge behind three rows of nodata on the north: the data span x 500000-501800, y 3998800-4000000."""
    z = np.vstack([np.full((3, 60), -9999.0, np.float32), _ridge()])
    return i.tif("collar.tif", z, transform=TRANSFORM @ Affine.translation(0, -3), nodata=-9999.0)


def _demo_existing_out(i: Inputs) -> list[str]:
    i.out.mkdir()
    (i.out / "keep.txt").write_text("mine")
    return ["demo", "--out", str(i.out)]


CASES: list[tuple[str, Callable[[Inputs], list[str]], tuple[str, ...]]] = [
    ("truncated GeoTIFF", _truncated, ("truncated.tif",)),
    ("corrupt GeoTIFF header", _corrupt, ("ridge.tif", "cannot open")),
    ("a text file", _text, ("heights.tif", "cannot open")),
    ("missing DEM file", lambda i: _assess(str(i.dir / "nowhere.tif"), "--out", str(i.out)), ("nowhere.tif", "does not exist")),
    ("DEM is a folder", lambda i: _assess(str(i.dir), "--out", str(i.out)), ("directory",)),
    ("DEM with no CRS", lambda i: _assess(i.tif("nocrs.tif", _ridge(), crs=None), "--out", str(i.out)), ("CRS", "--cell-size")),
    ("all-nodata DEM", lambda i: _assess(i.tif("void.tif", np.full((40, 60), -9999.0, np.float32), nodata=-9999.0),
                                         "--out", str(i.out)), ("valid cell",)),
    ("flat DEM", lambda i: _assess(i.tif("flat.tif", np.full((40, 60), 250.0, np.float32)), "--out", str(i.out)),
     ("flat", "no relief", "no channels")),
    ("2 x 2 DEM", lambda i: _assess(i.tif("tiny.tif", np.arange(4, dtype=np.float32).reshape(2, 2)), "--out",
                                    str(i.out)), ("2 x 2", "3 x 3")),
    ("rotated grid", lambda i: _assess(i.tif("rotated.tif", _ridge(), transform=Affine(30, 5, 5e5, 5, -30, 4e6)),
                                       "--out", str(i.out)), ("rotated",)),
    ("multi-band DEM without --band", lambda i: _assess(i.tif("bands.tif", np.stack([_ridge()] * 3)), "--out",
                                                        str(i.out)), ("3 bands", "--band")),
    ("--bounds outside the DEM", lambda i: _assess(i.ridge(), "--bounds", "0,0,10,10", "--out", str(i.out)),
     ("bounds", "overlap")),
    ("side point outside the DEM", lambda i: _assess(i.ridge(), "--out", str(i.out), sides=("10,20", "east")),
     ("outside the DEM",)),
    ("side point on nodata", _nodata_point, ("nodata",)),
    ("the same side twice", lambda i: _assess(i.ridge(), "--out", str(i.out), sides=("west", "West")), ("same",)),
    ("a side with no channels", lambda i: _assess(i.tif("edge.tif", _ridge(crest=57, steep=3.0)), "--out", str(i.out)),
     ("side b", "no channels")),
    ("sides that overlap", lambda i: _assess(i.ridge(), "--out", str(i.out),
                                             sides=("500015,3999385", "500015,3999385.5")), ("overlap",)),
    ("malformed SPEC", lambda i: _assess(i.ridge(), "--out", str(i.out), sides=("500100,abc", "east")),
     ("500100,abc", "x,y")),
    ("empty SPEC", lambda i: _assess(i.ridge(), "--out", str(i.out), sides=(" ", "east")), ("empty",)),
    ("lon/lat SPEC out of range", lambda i: _assess(i.ridge(), "--lonlat", "--out", str(i.out),
                                                    sides=("200,95", "east")), ("longitude,latitude",)),
    ("lon/lat SPEC on a DEM without CRS", lambda i: _assess(i.tif("nocrs.tif", _ridge(), crs=None), "--cell-size",
                                                            "30", "--lonlat", "--out", str(i.out), sides=("3,4", "east")),
     ("no CRS",)),
    ("erosion rate with erodibility K", lambda i: _assess(i.ridge(), "--erosion-rate-a", "0.1", "--erodibility-k",
                                                          "1e-5", "--out", str(i.out)),
     ("--erodibility-k", "--erosion-rate-a")),
    ("erosion rate with knickpoint age", lambda i: _assess(i.ridge(), "--erosion-rate-b", "0.1", "--knickpoint-age",
                                                           "1e5", "--out", str(i.out)), ("--knickpoint-age",)),
    ("closed edge that is also a side", lambda i: _assess(i.ridge(), "--closed-edges", "west", "--out", str(i.out)),
     ("--closed-edges", "--side-a")),
    # a closure acts on the grid's outermost row: behind a nodata collar it would close nothing (docs/methods.md §1);
    # the --bounds offered are the data's extent, from the construction above (60 x 40 cells of 30 m)
    ("closed edge behind a nodata collar", lambda i: _assess(_collared(i), "--closed-edges", "north", "--out",
                                                             str(i.out)),
     ("--closed-edges north", "collar", "--bounds 500000,3998800,501800,4000000")),
    ("screen with a closed edge behind a nodata collar",
     lambda i: _screen(_collared(i), "--closed-edges", "south,north", "--out", str(i.out)),
     ("--closed-edges north", "--bounds 500000,3998800,501800,4000000")),
    ("forecast with a closed edge behind a nodata collar",
     lambda i: _forecast(_collared(i), "--closed-edges", "north", "--out", str(i.out)),
     ("--closed-edges north", "--bounds 500000,3998800,501800,4000000")),
    ("every edge closed", lambda i: _assess(i.ridge(), "--closed-edges", "north,south,east,west", "--out",
                                            str(i.out)), ("--closed-edges",)),
    ("unknown closed edge", lambda i: _assess(i.ridge(), "--closed-edges", "up", "--out", str(i.out)),
     ("--closed-edges", "'up'")),
    ("theta 5", lambda i: _assess(i.ridge(), "--theta", "5", "--out", str(i.out)), ("--theta", "'5'")),
    ("theta not a number", lambda i: _assess(i.ridge(), "--theta", "steep", "--out", str(i.out)), ("--theta", "steep")),
    ("channel area -1", lambda i: _assess(i.ridge(), "--channel-area", "-1", "--out", str(i.out)),
     ("--channel-area", "'-1'")),
    ("channel area below two cells", lambda i: _assess(i.ridge(), "--channel-area", "100", "--out", str(i.out)),
     ("--channel-area", "two cells")),
    ("channel area larger than the DEM", lambda i: _assess(i.ridge(), "--channel-area", "1e9", "--out", str(i.out)),
     ("--channel-area", "whole DEM")),
    ("dem error -1", lambda i: _assess(i.ridge(), "--dem-error", "-1", "--out", str(i.out)), ("--dem-error", "'-1'")),
    ("erosion rate 1e6 mm/yr", lambda i: _assess(i.ridge(), "--erosion-rate-a", "1e6", "--out", str(i.out)),
     ("--erosion-rate-a", "1e6")),
    ("erosion rate nan", lambda i: _assess(i.ridge(), "--erosion-rate-b", "nan", "--out", str(i.out)),
     ("--erosion-rate-b",)),
    ("slope exponent 10", lambda i: _assess(i.ridge(), "--n", "10", "--out", str(i.out)), ("--n", "'10'")),
    ("forecast with slope exponent 10", lambda i: _forecast(i.ridge(), "--n", "10", "--out", str(i.out)),
     ("--n", "'10'", "0.5")),
    ("negative seed", lambda i: _assess(i.ridge(), "--seed", "-1", "--out", str(i.out)), ("--seed",)),
    ("base level above every channel", lambda i: _assess(i.ridge(), "--base-level", "5000", "--out", str(i.out)),
     ("base level",)),
    ("sea level above the land", lambda i: _assess(i.ridge(), "--sea-level", "1e4", "--out", str(i.out)),
     ("--sea-level",)),
    ("unknown vertical unit", lambda i: _assess(i.ridge(), "--vertical-unit", "yards", "--out", str(i.out)),
     ("--vertical-unit", "yards")),
    ("runoff raster of the wrong shape", _runoff_wrong_shape, ("--runoff", "10 x 12", "DEM grid")),
    ("runoff raster shifted off the grid", _runoff_other_place, ("--runoff", "DEM grid")),
    ("runoff raster with negative values", _runoff_negative, ("--runoff", "positive")),
    ("runoff raster missing", lambda i: _assess(i.ridge(), "--runoff", str(i.dir / "rain.tif"), "--out", str(i.out)),
     ("--runoff", "rain.tif")),
    ("existing output folder", _existing_out, ("already exists", "--overwrite")),
    ("--overwrite on a folder that is not an output", _overwrite_foreign, ("not an earlier divides output",)),
    ("output path is a file", _out_is_file, ("not a folder",)),
    ("output path under a file", _out_under_file, ("report.pdf", "not a folder")),
    ("missing --side-b", lambda i: ["assess", i.ridge(), "--side-a", "west", "--out", str(i.out)], ("--side-b",)),
    ("unknown option", lambda i: _assess(i.ridge(), "--colour", "--out", str(i.out)), ("--colour",)),
    ("demo into an existing folder", _demo_existing_out, ("already exists", "--overwrite")),
    # screen checks the DEM as assess does (before, it screened a flat DEM or a sea above the land into an empty
    # screening, and took a channel area of one cell)
    ("screen a flat DEM", lambda i: _screen(i.tif("flat.tif", np.full((40, 60), 250.0, np.float32)), "--out",
                                            str(i.out)), ("flat", "no relief")),
    ("screen with the sea above the land", lambda i: _screen(i.ridge(), "--sea-level", "1e4", "--out", str(i.out)),
     ("--sea-level",)),
    ("screen with a channel area under two cells", lambda i: _screen(i.ridge(), "--channel-area", "1", "--out",
                                                                     str(i.out)), ("--channel-area", "two cells")),
    ("screen with a channel area as large as the DEM", lambda i: _screen(i.ridge(), "--channel-area", "1e12",
                                                                         "--out", str(i.out)),
     ("--channel-area", "whole DEM")),
    # forecast checks the DEM as assess does (before, a flat DEM or a sea above the land ended in "side a has no
    # channels ... lower --channel-area", and a channel area of one m² ran with every cell a channel)
    ("forecast a flat DEM", lambda i: _forecast(i.tif("flat.tif", np.full((40, 60), 250.0, np.float32)), "--out",
                                                str(i.out)), ("flat", "no relief")),
    ("forecast with the sea above the land", lambda i: _forecast(i.ridge(), "--sea-level", "1e4", "--out",
                                                                 str(i.out)), ("--sea-level",)),
    ("forecast with a channel area under two cells", lambda i: _forecast(i.ridge(), "--channel-area", "1", "--out",
                                                                         str(i.out)), ("--channel-area", "two cells")),
    # inspect too (before, it described a flat DEM or an all-sea one and suggested a channel area for it)
    ("inspect a flat DEM", lambda i: ["inspect", i.tif("flat.tif", np.full((40, 60), 250.0, np.float32))],
     ("flat", "no relief")),
    ("inspect with the sea above the land", lambda i: ["inspect", i.ridge(), "--sea-level", "1e4"], ("--sea-level",)),
    ("inspect with a closed edge behind a nodata collar",
     lambda i: ["inspect", _collared(i), "--closed-edges", "north"], ("--closed-edges north", "collar")),
    ("screen with no basin above the minimum area", lambda i: _screen(i.ridge(), "--min-basin-area", "1e11",
                                                                      "--out", str(i.out)),
     ("no divide to screen", "minimum basin area")),
]


def _snapshot(folder: Path) -> dict[str, bytes]:
    """Every file under ``folder`` (hidden ones too) with its content."""
    return {str(p.relative_to(folder)): (p.read_bytes() if p.is_file() else b"<dir>") for p in folder.rglob("*")}


def test_the_corpus_is_large_enough():
    assert len(CASES) >= 20  # the brief asks for at least 20 bad inputs


PROGRESS = re.compile(r"^(divides: \[\d+/\d+\] |  )")  # the stage and step lines of the progress report


@pytest.mark.parametrize("quiet", [True, False], ids=["quiet", "with-progress"])
@pytest.mark.parametrize("build, words", [pytest.param(b, w, id=name) for name, b, w in CASES])
def test_bad_input_is_one_line_exit_2_and_leaves_nothing(capsys, write_geotiff, tmp_path, build, words, quiet):
    inputs = Inputs(write_geotiff, tmp_path)
    argv = build(inputs) + (["--quiet"] if quiet else [])
    before = _snapshot(inputs.work)
    code = run(argv)
    out = capsys.readouterr()
    lines = [line for line in out.err.splitlines() if line.strip()]
    assert code == 2, out.err
    # With --quiet the error is the only line; without, it follows the progress lines of the
    # stages that ran before the problem showed (a user sees how far it got).
    errors = [line for line in lines if not PROGRESS.match(line)]
    assert len(errors) == 1 and lines[-1] == errors[0], out.err
    assert len(lines) == 1 or not quiet, out.err
    line = errors[0]
    assert line.startswith("divides: error: ")
    for word in words:
        assert word in line, f"{word!r} not in {line!r}"
    assert "Traceback" not in out.err
    assert out.out == ""
    assert _snapshot(inputs.work) == before  # nothing written, nothing half-written, nothing removed


@pytest.mark.parametrize("build", [_truncated, _runoff_wrong_shape, _existing_out], ids=["truncated", "runoff", "exists"])
def test_bad_input_through_a_real_process(write_geotiff, tmp_path, build):
    inputs = Inputs(write_geotiff, tmp_path)
    argv = build(inputs) + ["--quiet"]
    before = _snapshot(inputs.work)
    proc = subprocess.run([sys.executable, "-m", "divides", *argv], capture_output=True, text=True, timeout=120,
                          check=False)
    assert proc.returncode == 2, proc.stderr
    assert len([line for line in proc.stderr.splitlines() if line.strip()]) == 1, proc.stderr
    assert "Traceback" not in proc.stderr and proc.stdout == ""
    assert _snapshot(inputs.work) == before


def test_a_failure_while_writing_leaves_no_folder(capsys, write_geotiff, tmp_path, monkeypatch):
    # A disk that fills up half way: the writer's atomic folder must vanish (brief: no
    # half-written outputs). The failure is simulated in the report's figure step.
    import divides.report.figures as figures

    def disk_full(*args, **kwargs):
        raise OSError(28, "No space left on device")

    monkeypatch.setattr(figures, "render_figures", disk_full)
    inputs = Inputs(write_geotiff, tmp_path)
    code = run(_assess(inputs.ridge(), "--out", str(inputs.out), "--quiet"))
    err = capsys.readouterr().err
    assert code == 2, err
    assert "No space left on device" in err and "Traceback" not in err
    assert list(inputs.work.iterdir()) == []
