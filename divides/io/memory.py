"""How much memory a DEM will need, how much there is, and a refusal before reading if it cannot fit.

The figures per cell are measured peaks of the in-memory path (resident memory
beyond the Python process, per DEM cell) on seeded fractal and ridge DEMs with
the benchmark scripts in ``tests/benchmarks``; they are rounded up. The guard
runs before any cell is read, so a DEM that cannot fit ends in one line naming
the need, what is available and what would work, never in a ``MemoryError``.
"""

from __future__ import annotations

import os
from dataclasses import dataclass

from divides.errors import GridError

__all__ = ["BYTES_PER_CELL", "MemoryNeed", "available_bytes", "read_bytes_per_cell", "check_fits", "fits",
           "format_bytes", "row_blocks", "MEMORY_LIMIT_ENV"]

#: Peak bytes per DEM cell of each task, beyond reading the DEM itself; ``<task>_tiled`` is the
#: same task with conditioning and routing by tiles (:mod:`divides.terrain.tiled_flow`).
#: route: fill + flats + D8 + order + area, 31-37 B/cell (bench_flow.py, 2000²-4000²) plus the
#: elevation kept by the caller; inspect: routing + basins (bench_flow.py + one label grid);
#: screen: 4.92 GiB at 10⁸ cells (bench_screen_cli.py, 10 000², 3 December 2026) = 50 B/cell with
#: the read, 64 B/cell at 4000² (sampled RSS less the interpreter, outputs included) -> 60 beyond the
#: read; its peak comes after routing (near-divide fields, outputs), so routing by tiles does not lower it;
#: assess: 964 MB at 2000² less the 0.25 GB interpreter (bench_assess.py) = 178 B/cell -> 190, whose
#: peak is not routing either;
#: forecast: one model grid set per run (bench_model.py: ~16 float64 grids) ≈ 130 B/cell.
#: A DEM with interior holes of nodata keeps a filled copy and its mask through the task (5.2 B/cell measured on
#: float32, bench_screen.py --holes 200 against 0 at 3000²), not charged: the read's charge is as much more than
#: the read keeps for float input, 2-4 B/cell short for integer input (docs/large-dems.md).
BYTES_PER_CELL: dict[str, float] = {
    "route": 40.0,
    "inspect": 60.0,
    "screen": 60.0,
    "screen_tiled": 60.0,
    "assess": 190.0,
    "assess_tiled": 190.0,
    "forecast": 130.0,
}

#: Environment variable capping the memory divides may plan to use (bytes, or with a
#: K/M/G/T suffix), e.g. on a shared machine; the smaller of it and what is free counts.
MEMORY_LIMIT_ENV = "DIVIDES_MEMORY_LIMIT"

# Part of the free memory a run may plan to take: the rest is headroom for the
# interpreter, libraries and estimates that are a little low.
_USABLE_SHARE = 0.85


@dataclass(frozen=True)
class MemoryNeed:
    """What a caller of :func:`divides.read_dem` will do with the DEM, for the guard.

    Attributes
    ----------
    task : str
        Name in messages (``"screen"``, ``"assess"``, ...).
    bytes_per_cell : float
        Peak memory per cell beyond the read (see :data:`BYTES_PER_CELL`).
    remedy : str
        What would work instead, in the caller's words (e.g. ``"--bounds"``).
    """

    task: str
    bytes_per_cell: float
    remedy: str = "read a smaller window with bounds="

    @classmethod
    def of(cls, task: str, remedy: str) -> MemoryNeed:
        """The measured need of ``task`` (a key of :data:`BYTES_PER_CELL`)."""
        return cls(task, BYTES_PER_CELL[task], remedy)


def format_bytes(n: float) -> str:
    """Human-readable size in binary units.

    Examples
    --------
    >>> format_bytes(40 * 2**30)
    '40.0 GiB'
    >>> format_bytes(512)
    '512 B'
    """
    for unit, size in (("TiB", 2**40), ("GiB", 2**30), ("MiB", 2**20), ("KiB", 2**10)):
        if n >= size:
            return f"{n / size:.1f} {unit}"
    return f"{n:.0f} B"


def _parse_size(text: str) -> int | None:
    text = text.strip().upper().removesuffix("B").removesuffix("I")
    factor = 1
    if text and text[-1] in "KMGT":
        factor = 1024 ** ("KMGT".index(text[-1]) + 1)
        text = text[:-1]
    try:
        value = float(text)
    except ValueError:
        return None
    return int(value * factor) if value > 0 else None


def _read_int(path: str) -> int | None:
    try:
        with open(path) as fh:
            text = fh.read().strip()
    except OSError:
        return None
    return None if text in ("", "max") else int(text) if text.isdigit() else None


def _cgroup_free() -> int | None:
    """Room left under this process's cgroup memory limit (v2 or v1), or None when unlimited."""
    best = None
    for limit_file, usage_file in (("/sys/fs/cgroup/memory.max", "/sys/fs/cgroup/memory.current"),
                                   ("/sys/fs/cgroup/memory/memory.limit_in_bytes",
                                    "/sys/fs/cgroup/memory/memory.usage_in_bytes")):
        limit, usage = _read_int(limit_file), _read_int(usage_file)
        if limit is None or limit >= 2**60:  # v1 reports "unlimited" as a huge page-aligned number
            continue
        free = max(0, limit - (usage or 0))
        best = free if best is None else min(best, free)
    return best


def _system_available() -> int:
    """Memory the kernel can hand out without swapping (MemAvailable)."""
    try:
        import psutil

        return int(psutil.virtual_memory().available)
    except ImportError:  # psutil is optional: read the kernel's own figure
        with open("/proc/meminfo") as fh:
            for line in fh:
                if line.startswith("MemAvailable:"):
                    return int(line.split()[1]) * 1024
    raise OSError("no MemAvailable in /proc/meminfo")


def available_bytes() -> int:
    """Memory this process may still use: free memory, the cgroup limit and ``DIVIDES_MEMORY_LIMIT``.

    Returns
    -------
    int
        The smallest of the three (bytes).
    """
    candidates = [_system_available()]
    cgroup = _cgroup_free()
    if cgroup is not None:
        candidates.append(cgroup)
    cap = os.environ.get(MEMORY_LIMIT_ENV)
    if cap:
        parsed = _parse_size(cap)
        if parsed is None:
            raise GridError(f"{MEMORY_LIMIT_ENV}={cap!r} is not a size; give bytes or a number with K, M, G or T")
        candidates.append(parsed)
    return min(candidates)


def read_bytes_per_cell(source_itemsize: int, *, wide: bool) -> float:
    """Peak bytes per cell of reading: the raw band, the float elevations, the valid and nodata masks."""
    return source_itemsize + (8 if wide else 4) + 2


def fits(cells: int, bytes_per_cell: float) -> bool:
    """Whether ``cells`` more cells at ``bytes_per_cell`` fit in the memory usable now (85 % of what is free)."""
    return cells * bytes_per_cell <= available_bytes() * _USABLE_SHARE


def check_fits(name: str, rows: int, cols: int, read_per_cell: float, need: MemoryNeed | None) -> None:
    """Refuse, before reading, a DEM whose read and ``need`` would not fit in memory.

    Parameters
    ----------
    name : str
        The DEM, for the message.
    rows, cols : int
        Cells that would be read (after any bounds window).
    read_per_cell : float
        Bytes per cell of the read itself (:func:`read_bytes_per_cell`).
    need : MemoryNeed, optional
        What the caller does next; None checks the read alone.

    Raises
    ------
    GridError
        One line: the need, what is available and what would work instead.
    """
    cells = rows * cols
    per_cell = read_per_cell + (need.bytes_per_cell if need is not None else 0.0)
    total = cells * per_cell
    free = available_bytes()
    usable = free * _USABLE_SHARE
    if total <= usable:
        return
    task = need.task if need is not None else "reading"
    remedy = need.remedy if need is not None else MemoryNeed("reading", 0.0).remedy
    fit = int(usable // per_cell)
    side = int(fit**0.5)
    raise GridError(
        f"DEM '{name}' is too large for memory: {task} of {rows} x {cols} cells needs about "
        f"{format_bytes(total)} (~{per_cell:.0f} B/cell), {format_bytes(free)} is available; "
        f"{remedy} (at most about {side} x {side} cells fit)"
    )


def row_blocks(shape: tuple[int, int], cells: int = 1 << 22) -> list[slice]:
    """Blocks of whole rows of about ``cells`` cells: grid-wide counts without a grid-sized temporary (10^9 cells).

    Examples
    --------
    >>> row_blocks((5, 2), cells=4)
    [slice(0, 2, None), slice(2, 4, None), slice(4, 6, None)]
    """
    step = max(1, cells // max(1, shape[1]))
    return [slice(r, r + step) for r in range(0, shape[0], step)]
