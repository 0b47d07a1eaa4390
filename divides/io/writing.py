"""Writing outputs atomically: rasters on the DEM's grid, text and JSON.

Every output file of `divides` goes through :func:`atomic_write`, so a run
that fails leaves either the previous file or nothing, never half a file.
"""

from __future__ import annotations

import json
import math
import os
import secrets
from collections.abc import Iterable, Iterator
from contextlib import contextmanager, suppress
from pathlib import Path
from typing import Any

import numpy as np
import rasterio
import rasterio.errors

from divides.errors import DividesError, GridError, OutputError, ParameterError
from divides.io.dem import Dem

__all__ = ["atomic_write", "write_raster", "write_text", "write_json", "write_feature_collection"]

#: Rasters at least this many cells on each side are written in square tiles
#: of this size (GeoTIFF tiles must be multiples of 16; 256 is common practice).
TILE = 256


@contextmanager
def atomic_write(path: str | os.PathLike, *, parents: bool = False) -> Iterator[Path]:
    """Write a file under a temporary name and move it into place on success.

    The temporary file lives in the target's directory (so the final rename
    is atomic on the same file system) and is removed if the block fails.

    Parameters
    ----------
    path : str or os.PathLike
        The final file.
    parents : bool
        Create missing parent directories.

    Yields
    ------
    pathlib.Path
        The temporary path to write to. It already exists (empty) and keeps
        the target's suffix, so format-sniffing writers still work.

    Raises
    ------
    OutputError
        The location cannot be written; the message names ``path``.

    Examples
    --------
    >>> import tempfile
    >>> out = Path(tempfile.mkdtemp()) / "note.txt"
    >>> with atomic_write(out) as tmp:
    ...     _ = tmp.write_text("done")
    >>> out.read_text()
    'done'
    """
    target = Path(os.fspath(path))
    if parents:
        try:
            target.parent.mkdir(parents=True, exist_ok=True)
        except OSError as exc:
            raise OutputError(f"cannot create the folder of output '{target}': {_os_reason(exc)}") from None
    if target.is_dir():
        raise OutputError(f"cannot write output '{target}': it is an existing directory; give a file name")
    tmp = _create_temporary(target)
    try:
        yield tmp
        _fsync(tmp)
        os.replace(tmp, target)
    except BaseException as exc:
        with suppress(OSError):
            tmp.unlink()
        if isinstance(exc, OSError) and not isinstance(exc, DividesError):
            raise OutputError(f"cannot write output '{target}': {_os_reason(exc)}") from exc
        raise


def write_raster(
    path: str | os.PathLike,
    array: np.ndarray,
    dem: Dem,
    *,
    nodata: float | None = None,
    dtype: str | np.dtype | None = None,
    description: str | None = None,
    parents: bool = False,
) -> Path:
    """Write a single-band GeoTIFF on the grid of ``dem``.

    Parameters
    ----------
    path : str or os.PathLike
        Output file (written atomically).
    array : ndarray, shape ``dem.shape``
        Values, north-up like ``dem.elevation``. Boolean arrays are stored
        as 0/1 bytes.
    dem : Dem
        Supplies the transform and CRS.
    nodata : float, optional
        Value stored for missing cells; NaN cells of a float array are
        written as this value. Float outputs default to NaN.
    dtype : str or numpy dtype, optional
        Stored type; defaults to the array's (float16 widened to float32).
    description : str, optional
        Band description shown by GIS software.
    parents : bool
        Create missing parent directories.

    Returns
    -------
    pathlib.Path
        The written file.

    Raises
    ------
    GridError
        ``array`` does not have the DEM's shape.
    ParameterError
        ``dtype`` is not storable or ``nodata`` does not fit it.
    OutputError
        The file cannot be written.
    """
    target = Path(os.fspath(path))
    values = np.asarray(array)
    if values.shape != dem.shape:
        raise GridError(
            f"cannot write '{target}': the array has shape {values.shape} but the DEM grid is "
            f"{dem.shape} (rows, cols); rasters are written on the DEM's grid"
        )
    out_dtype = _output_dtype(values.dtype, dtype, target)
    is_float = out_dtype.kind == "f"
    if nodata is None and is_float:
        nodata = math.nan
    nodata = _check_nodata(nodata, out_dtype, target)

    if values.dtype.kind == "f":
        missing = np.isnan(values)
        if missing.any():
            if nodata is None or (not is_float and math.isnan(nodata)):
                raise ParameterError(
                    f"cannot write '{target}': the array has NaN cells but dtype {out_dtype.name} "
                    "cannot store NaN; give a nodata value that fits it"
                )
            if not math.isnan(nodata):
                values = np.where(missing, nodata, values)
        if not is_float:
            _check_fits(values[~missing] if missing.any() else values, out_dtype, target)
    stored = values.astype(out_dtype, copy=False)

    rows, cols = dem.shape
    profile: dict[str, Any] = {
        "driver": "GTiff",
        "width": cols,
        "height": rows,
        "count": 1,
        "dtype": out_dtype.name,
        "crs": dem.crs,
        "transform": dem.transform,
        "nodata": nodata,
        "compress": "deflate",
        # Floating-point predictor for floats, horizontal differencing otherwise.
        "predictor": 3 if is_float else 2,
        "bigtiff": "IF_SAFER",
    }
    if rows >= TILE and cols >= TILE:
        profile.update(tiled=True, blockxsize=TILE, blockysize=TILE)
    with atomic_write(target, parents=parents) as tmp:
        try:
            with rasterio.open(tmp, "w", **profile) as dst:
                dst.write(stored, 1)
                if description:
                    dst.set_band_description(1, description)
        except rasterio.errors.RasterioError as exc:
            raise OutputError(f"cannot write raster '{target}': {exc}") from None
    return target


def write_text(
    path: str | os.PathLike, text: str, *, encoding: str = "utf-8", parents: bool = False
) -> Path:
    """Write ``text`` to ``path`` atomically (exactly as given, no newline translation).

    Parameters
    ----------
    path : str or os.PathLike
        Output file.
    text : str
        Content.
    encoding : str
        Text encoding.
    parents : bool
        Create missing parent directories.

    Returns
    -------
    pathlib.Path
        The written file.
    """
    target = Path(os.fspath(path))
    data = text.encode(encoding)
    with atomic_write(target, parents=parents) as tmp:
        tmp.write_bytes(data)
    return target


def write_json(
    path: str | os.PathLike, obj: Any, *, indent: int | None = 2, parents: bool = False
) -> Path:
    """Write ``obj`` as strict JSON (RFC 8259) atomically.

    NumPy scalars and arrays become JSON numbers and lists, paths become
    strings, and non-finite floats (NaN, inf) become ``null`` because JSON
    has no such numbers.

    Parameters
    ----------
    path : str or os.PathLike
        Output file.
    obj : object
        Dicts, lists, tuples, strings, numbers, booleans, None, NumPy values, paths.
    indent : int or None
        Indentation; None for one line.
    parents : bool
        Create missing parent directories.

    Returns
    -------
    pathlib.Path
        The written file.

    Raises
    ------
    TypeError
        ``obj`` holds something JSON cannot represent (raised before any file is created).
    """
    return write_text(path, _dumps(obj, indent) + "\n", parents=parents)


def write_feature_collection(path: str | os.PathLike, features: Iterable[dict], *, parents: bool = False) -> Path:
    """Write a GeoJSON FeatureCollection (RFC 7946) atomically, one feature per line as it comes.

    The same JSON rules as :func:`write_json`; a long layer (every divide of a
    mountain belt) is never held as one string, and ``features`` may be a generator.

    Parameters
    ----------
    path : str or os.PathLike
        Output file.
    features : iterable of dict
        GeoJSON Feature objects.
    parents : bool
        Create missing parent directories.

    Returns
    -------
    pathlib.Path
        The written file.
    """
    target = Path(os.fspath(path))
    with atomic_write(target, parents=parents) as tmp, open(tmp, "w", encoding="utf-8", newline="") as fh:
        fh.write('{"type": "FeatureCollection", "features": [')
        for i, feature in enumerate(features):
            fh.write(("," if i else "") + "\n" + _dumps(feature, None))
        fh.write("\n]}\n")
    return target


def _dumps(obj: Any, indent: int | None) -> str:
    """Strict JSON text of ``obj`` (NaN and inf as null, NumPy values as numbers)."""
    try:  # fast path: the encoder walks the document once; NumPy values and paths through _default
        return json.dumps(obj, indent=indent, ensure_ascii=False, allow_nan=False, default=_default)
    except (ValueError, TypeError):  # a NaN/inf to turn into null, or a key JSON cannot take as it is
        return json.dumps(_jsonable(obj), indent=indent, ensure_ascii=False, allow_nan=False)


def _default(obj: Any) -> Any:
    """What the JSON encoder cannot write itself: NumPy values and paths (anything else: TypeError)."""
    if isinstance(obj, np.ndarray):
        return obj.tolist()
    if isinstance(obj, np.generic):
        return obj.item()
    if isinstance(obj, os.PathLike):
        return os.fspath(obj)
    raise TypeError(f"Object of type {type(obj).__name__} is not JSON serializable")


# ---------------------------------------------------------------------- helpers
def _create_temporary(target: Path) -> Path:
    # O_EXCL avoids clobbering a concurrent writer; mode 0o666 lets the umask
    # decide permissions, as for any ordinary new file.
    for _ in range(100):
        tmp = target.with_name(f".{target.name}.{secrets.token_hex(4)}.tmp{target.suffix}")
        try:
            fd = os.open(tmp, os.O_WRONLY | os.O_CREAT | os.O_EXCL, 0o666)
        except FileExistsError:
            continue
        except OSError as exc:
            raise OutputError(f"cannot write output '{target}': {_os_reason(exc)}") from None
        os.close(fd)
        return tmp
    raise OutputError(f"cannot write output '{target}': no free temporary name in its folder")


def _fsync(path: Path) -> None:
    # Flush to disk before the rename so a crash cannot leave an empty file in place.
    fd = os.open(path, os.O_RDONLY)
    try:
        os.fsync(fd)
    finally:
        os.close(fd)


def _os_reason(exc: OSError) -> str:
    return exc.strerror or str(exc) or type(exc).__name__


def _output_dtype(source: np.dtype, requested: Any, target: Path) -> np.dtype:
    if requested is None:
        out = np.dtype(np.uint8) if source == np.bool_ else source
        if out == np.float16:
            out = np.dtype(np.float32)
    else:
        try:
            out = np.dtype(requested)
        except TypeError:
            out = None
    storable = ("uint8", "int8", "uint16", "int16", "uint32", "int32", "uint64", "int64", "float32", "float64")
    if out is None or out.name not in storable:
        raise ParameterError(
            f"cannot write '{target}': dtype {requested if requested is not None else source!s} "
            f"cannot be stored in a GeoTIFF band; use one of {', '.join(storable)}"
        )
    return out


def _check_nodata(nodata: Any, dtype: np.dtype, target: Path) -> float | None:
    if nodata is None:
        return None
    try:
        value = float(nodata)
    except (TypeError, ValueError):
        raise ParameterError(f"cannot write '{target}': nodata must be a number; got {nodata!r}") from None
    if dtype.kind == "f":
        if math.isfinite(value) and abs(value) > np.finfo(dtype).max:
            raise ParameterError(f"cannot write '{target}': nodata {nodata!r} does not fit dtype {dtype.name}")
        return value
    info = np.iinfo(dtype)
    if not (math.isfinite(value) and value == int(value) and info.min <= value <= info.max):
        raise ParameterError(
            f"cannot write '{target}': nodata {nodata!r} does not fit dtype {dtype.name} "
            f"(an integer from {info.min} to {info.max})"
        )
    return value


def _check_fits(values: np.ndarray, dtype: np.dtype, target: Path) -> None:
    """Refuse float values that an integer dtype would wrap or truncate silently."""
    if values.size == 0:
        return
    info = np.iinfo(dtype)
    low, high = float(np.min(values)), float(np.max(values))
    if not (math.isfinite(low) and math.isfinite(high)) or low < info.min or high > info.max:
        raise ParameterError(
            f"cannot write '{target}': values range from {low} to {high}, outside dtype "
            f"{dtype.name} ({info.min} to {info.max}); choose a wider dtype"
        )


def _jsonable(obj: Any) -> Any:
    if isinstance(obj, dict):
        return {str(_jsonable(k)) if not isinstance(k, str) else k: _jsonable(v) for k, v in obj.items()}
    if isinstance(obj, (list, tuple)):
        return [_jsonable(v) for v in obj]
    if isinstance(obj, np.ndarray):
        return _jsonable(obj.tolist())
    if isinstance(obj, np.generic):
        return _jsonable(obj.item())
    if isinstance(obj, float) and not math.isfinite(obj):
        return None
    if isinstance(obj, os.PathLike):
        return os.fspath(obj)
    return obj
