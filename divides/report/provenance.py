"""Where an output came from: tool version, time, command, DEM file and its checksum.

A deliverable must say what made it and from which data, without carrying the
client's folder structure: every path in an output is reduced to its file name.
"""

from __future__ import annotations

import copy
import datetime as _dt
import hashlib
import os
from collections.abc import Sequence
from typing import Any

__all__ = ["provenance", "file_sha256", "public_command", "public_summary", "file_name"]

_CHUNK = 1 << 20  # 1 MiB reads: constant memory whatever the DEM size


def file_name(path: str | os.PathLike | None) -> str | None:
    """The last component of ``path`` (``None`` stays ``None``).

    Examples
    --------
    >>> file_name("/clients/acme/site 4/dem.tif")
    'dem.tif'
    """
    if path is None:
        return None
    text = os.fspath(path).rstrip("/\\")
    return text.replace("\\", "/").rsplit("/", 1)[-1] or text


def file_sha256(path: str | os.PathLike | None) -> str | None:
    """SHA-256 of a local file in hex, or None when there is no readable local file (in memory, URL)."""
    if path is None:
        return None
    try:
        digest = hashlib.sha256()
        with open(os.fspath(path), "rb") as f:
            for chunk in iter(lambda: f.read(_CHUNK), b""):
                digest.update(chunk)
    except OSError:
        return None
    return digest.hexdigest()


def _looks_like_path(arg: str) -> bool:
    return "/" in arg or "\\" in arg


def public_command(argv: Sequence[str], *, program: str = "divides") -> list[str]:
    """The argument list as run, with every path reduced to its file name.

    ``--out=/a/b`` keeps the option and loses the folders; other words are
    kept as typed.

    Examples
    --------
    >>> public_command(["assess", "/data/x/dem.tif", "--side-a", "west", "--out=/tmp/r"])
    ['divides', 'assess', 'dem.tif', '--side-a', 'west', '--out=r']
    """
    out = [program]
    for arg in argv:
        arg = str(arg)
        if arg.startswith("-") and "=" in arg:
            option, value = arg.split("=", 1)
            out.append(f"{option}={file_name(value) if _looks_like_path(value) else value}")
        elif not arg.startswith("-") and _looks_like_path(arg):
            out.append(file_name(arg) or arg)
        else:
            out.append(arg)
    return out


def provenance(
    dem_path: str | os.PathLike | None,
    *,
    command: Sequence[str] | None = None,
    created: _dt.datetime | None = None,
) -> dict[str, Any]:
    """The ``provenance`` block of ``summary.json``.

    Parameters
    ----------
    dem_path : str or os.PathLike or None
        The DEM file (None for a DEM built in memory).
    command : sequence of str, optional
        The command-line arguments after the program name; None when the
        outputs are written from Python.
    created : datetime, optional
        Time of writing (default: now, UTC).

    Returns
    -------
    dict
        ``tool_version``, ``created_utc`` (ISO 8601, seconds, ``Z``),
        ``command`` (list of str or None), ``dem_file`` (file name only) and
        ``dem_sha256`` (None without a local file).
    """
    from divides import __version__

    created = created or _dt.datetime.now(_dt.timezone.utc)
    return {
        "tool_version": __version__,
        "created_utc": created.astimezone(_dt.timezone.utc).replace(microsecond=0).isoformat().replace("+00:00", "Z"),
        "command": None if command is None else public_command(command),
        "dem_file": file_name(dem_path),
        "dem_sha256": file_sha256(dem_path),
    }


def public_summary(summary: dict, prov: dict) -> dict:
    """A copy of ``summary`` fit to hand over: ``provenance`` added, the DEM path reduced to its file name."""
    out = copy.deepcopy(summary)
    dem = out.get("dem")
    if isinstance(dem, dict) and "path" in dem:
        dem["path"] = file_name(dem["path"])
    first = {k: out.pop(k) for k in ("schema",) if k in out}
    return {**first, "provenance": prov, **out}
