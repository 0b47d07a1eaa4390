"""Writing every output of an assessment into one folder, atomically.

Everything is built in a hidden temporary folder beside ``out_dir`` and
renamed into place only when all files are written, so a failed or
interrupted run leaves neither a half-written ``out_dir`` nor the temporary
folder. An existing ``out_dir`` is refused unless ``overwrite``; even then
only a previous output of `divides` (or an empty folder) is replaced, never
an arbitrary folder, and only after the new outputs are complete.
"""

from __future__ import annotations

import json
import os
import secrets
import shutil
from collections.abc import Callable, Iterator
from contextlib import contextmanager, suppress
from pathlib import Path
from typing import TYPE_CHECKING, Any

from divides.errors import DividesError, OutputError
from divides.io.writing import atomic_write, write_json, write_text
from divides.report import figures as _figures
from divides.report import html as _html
from divides.report import layers as _layers
from divides.report import text as _text
from divides.report.provenance import provenance as _provenance
from divides.report.provenance import public_summary

if TYPE_CHECKING:  # pragma: no cover - imports for type hints only
    from divides.assess.assessment import Assessment

__all__ = ["write", "write_assessment", "staged_output", "check_out_dir", "STAGES"]

#: Stages reported to ``progress``, in order (a progress bar can size itself from this).
STAGES = (
    "summary.json",
    "verdict.txt",
    "layers",
    "rasters",
    "tables",
    *(f"figure: {name}" for name in _figures.FIGURES),
    "report.html",
    "finishing",
)


def _reason(exc: OSError) -> str:
    return exc.strerror or str(exc) or type(exc).__name__


def _is_previous_output(folder: Path) -> bool:
    """True for an empty folder or one holding a `divides` summary.json."""
    try:
        entries = list(folder.iterdir())
    except OSError:
        return False
    if not entries:
        return True
    summary = folder / "summary.json"
    try:
        schema = json.loads(summary.read_text(encoding="utf-8")).get("schema", "")
    except (OSError, ValueError, AttributeError):
        return False
    return isinstance(schema, str) and schema.startswith("divides.")


#: How an error names the two ways out: command-line options, or the Python arguments.
_WAYS_OUT = {
    True: ("--overwrite", "give another folder with --out DIR"),
    False: ("overwrite=True", "choose another out_dir"),
}


def check_out_dir(out_dir: str | os.PathLike, *, overwrite: bool = False, cli: bool = False) -> Path:
    """Check that ``out_dir`` may be written (before a long run) and return it as an absolute path.

    Parameters
    ----------
    out_dir : str or os.PathLike
    overwrite : bool
        An existing earlier output may be replaced.
    cli : bool
        Name the ways out as command-line options (``--out``, ``--overwrite``)
        rather than as Python arguments (``out_dir``, ``overwrite=True``).

    Raises
    ------
    OutputError
        ``out_dir`` exists and ``overwrite`` is False, it is not a folder,
        or it is a folder that is neither empty nor an earlier `divides`
        output (which ``overwrite`` never replaces).
    """
    out = Path(os.path.abspath(os.fspath(out_dir)))
    _check_target(out, overwrite, cli)
    return out


def _check_target(out: Path, overwrite: bool, cli: bool = False) -> None:
    replace, elsewhere = _WAYS_OUT[cli]
    if out.is_symlink() or out.exists():
        if not out.is_dir() or out.is_symlink():
            raise OutputError(f"cannot write outputs to '{out}': it exists and is not a folder; {elsewhere}")
        if not overwrite:
            raise OutputError(f"output folder '{out}' already exists (an earlier run?); pass {replace} to "
                              f"replace it, or {elsewhere}")
        if not _is_previous_output(out):
            raise OutputError(
                f"output folder '{out}' exists and is not an earlier divides output (no divides summary.json); "
                f"refusing to replace it even with {replace}: remove it yourself or {elsewhere}"
            )


def _make_temporary(out: Path) -> Path:
    """A new hidden folder beside ``out`` (same file system, so the final rename is atomic)."""
    try:
        out.parent.mkdir(parents=True, exist_ok=True)
        for _ in range(100):
            tmp = out.with_name(f".{out.name}.{secrets.token_hex(4)}.partial")
            try:
                os.mkdir(tmp)  # mode 0o777 less the umask, like any folder the user makes
            except FileExistsError:
                continue
            return tmp
    except OSError as exc:
        raise OutputError(f"cannot write outputs to '{out}': {_reason(exc)}") from None
    raise OutputError(f"cannot write outputs to '{out}': no free temporary name in '{out.parent}'")


def _write_all(result: Assessment, folder: Path, step: Callable[[str], None], summary: dict) -> None:
    step("summary.json")
    write_json(folder / "summary.json", summary)
    step("verdict.txt")
    write_text(folder / "verdict.txt", _text.verdict_text(result, summary=summary))
    step("layers")
    _layers.write_layers(result, folder / "layers")
    step("rasters")
    _layers.write_rasters(result, folder / "rasters")
    step("tables")
    _layers.write_tables(result, folder / "tables")
    vectors: dict[str, bytes] = {}
    pngs = _figures.render_figures(result, progress=step, vectors=vectors)
    for name, png in pngs.items():
        _write_bytes(folder / "figures" / f"{name}.png", png)
    for name, svg in vectors.items():
        _write_bytes(folder / "figures" / f"{name}.svg", svg)
    step("report.html")
    write_text(folder / "report.html", _html.render_report(result, pngs, captions=_figures.CAPTIONS, summary=summary))


def _write_bytes(path: Path, data: bytes) -> Path:
    with atomic_write(path, parents=True) as tmp:
        tmp.write_bytes(data)
    return path


def _move_into_place(tmp: Path, out: Path) -> None:
    """Rename ``tmp`` to ``out``; an existing ``out`` is moved aside first and removed after."""
    aside = None
    if out.exists():
        aside = out.with_name(f".{out.name}.{secrets.token_hex(4)}.replaced")
        os.rename(out, aside)
    try:
        os.rename(tmp, out)
    except OSError:
        if aside is not None:
            with suppress(OSError):
                os.rename(aside, out)  # put the previous outputs back
        raise
    if aside is not None:
        shutil.rmtree(aside, ignore_errors=True)


@contextmanager
def staged_output(out_dir: str | os.PathLike, *, overwrite: bool = False, cli: bool = False) -> Iterator[Path]:
    """Build an output folder under a temporary name and move it into place when the block succeeds.

    Yields a new, empty, hidden folder beside ``out_dir``. When the block
    ends normally the folder becomes ``out_dir`` (replacing an earlier output
    if ``overwrite``); when it raises (including ``KeyboardInterrupt``) the
    folder is removed and ``out_dir`` is left as it was.

    Raises
    ------
    OutputError
        As :func:`check_out_dir` (``cli`` as there), or when the location cannot be written.
    """
    out = check_out_dir(out_dir, overwrite=overwrite, cli=cli)
    tmp = _make_temporary(out)
    try:
        yield tmp
        _check_target(out, overwrite, cli)  # someone may have created it meanwhile
        _move_into_place(tmp, out)
    except BaseException as exc:
        shutil.rmtree(tmp, ignore_errors=True)
        if isinstance(exc, OSError) and not isinstance(exc, DividesError):
            raise OutputError(f"cannot write outputs to '{out}': {_reason(exc)}") from exc
        raise


def write_assessment(
    result: Assessment,
    out_dir: str | os.PathLike,
    *,
    overwrite: bool = False,
    progress: Callable[[str], None] | None = None,
    command: list[str] | None = None,
    cli: bool = False,
) -> Path:
    """Write every output of an assessment into ``out_dir``.

    Files: ``summary.json`` (with ``provenance``), ``verdict.txt``,
    ``report.html``, ``figures/*.png`` (200 dpi) and ``figures/*.svg``,
    ``layers/*.geojson`` (RFC 7946, WGS 84 lon/lat; none when the DEM has no
    CRS), ``rasters/*.tif`` and ``tables/*.csv``. No output holds a folder
    path: the DEM is named by its file name.

    Parameters
    ----------
    result : Assessment
    out_dir : str or os.PathLike
        Folder to create. Its parent is created if missing.
    overwrite : bool
        Replace an existing ``out_dir`` (only an empty folder or an earlier
        `divides` output) once the new outputs are complete.
    progress : callable, optional
        Called with the name of each stage (see :data:`STAGES`) as it starts.
    command : list of str, optional
        The command-line arguments that made ``result`` (recorded in
        ``provenance.command`` with paths reduced to file names); None from Python.
    cli : bool
        Errors name the command-line options rather than the Python arguments.

    Returns
    -------
    pathlib.Path
        The output folder.

    Raises
    ------
    OutputError
        ``out_dir`` exists (without ``overwrite``), is not a folder or an
        earlier output, or cannot be written; the message names the path.
    """
    step = progress if progress is not None else (lambda stage: None)
    summary = public_summary(result.summary, _provenance(result.dem.path, command=command))
    with staged_output(out_dir, overwrite=overwrite, cli=cli) as tmp:
        _write_all(result, tmp, step, summary)
        step("finishing")
    return Path(os.path.abspath(os.fspath(out_dir)))


def write(result: Any, out_dir: str | os.PathLike, *, overwrite: bool = False, **options: Any) -> Path:
    """Write the outputs of an assessment or a screening into a new folder ``out_dir``.

    The one entry for notebooks and scripts (``divides.write(result, "out")``):
    writing belongs to the report room, so the analysis rooms never import it.

    Parameters
    ----------
    result : Assessment or Screening
    out_dir : str or os.PathLike
    overwrite : bool
        Replace an earlier `divides` output in ``out_dir``.
    **options
        ``progress`` (assessments only), ``command``, ``cli``: see
        :func:`write_assessment`.

    Returns
    -------
    pathlib.Path
        The output folder.

    Raises
    ------
    OutputError
        As :func:`write_assessment`.
    TypeError
        ``result`` is neither an assessment nor a screening.
    """
    from divides.assess.assessment import Assessment
    from divides.assess.screen import Screening

    if isinstance(result, Assessment):
        return write_assessment(result, out_dir, overwrite=overwrite, **options)
    if isinstance(result, Screening):
        from divides.report.screening import write_screening

        options.pop("progress", None)
        return write_screening(result, out_dir, overwrite=overwrite, **options)
    raise TypeError(f"divides.write takes the result of divides.assess or of the screening; got {type(result).__name__}")
