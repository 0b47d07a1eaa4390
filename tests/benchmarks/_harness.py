"""Shared command-line loop of the size-sweep benchmarks: each size in a fresh subprocess."""

from __future__ import annotations

import argparse
import json
import resource
import subprocess
import sys
from collections.abc import Callable


def peak_rss_mb() -> int:
    """Peak resident memory of this process so far (MB)."""
    return round(resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024)


def sweep(script: str, doc: str, run_one: Callable[..., dict], row: Callable[[dict], str],
          default_sizes: list[int], *, extra: dict | None = None) -> None:
    """Parse ``--sizes`` (and ``extra`` string options), run each size in its own process, print rows.

    ``run_one(n, **extra_values)`` measures one size and returns a JSON-ready dict; ``row``
    formats it. A child process is called with ``--one N`` so that peak memory is its own.
    """
    parser = argparse.ArgumentParser(description=doc.splitlines()[0])
    parser.add_argument("--sizes", type=int, nargs="+", default=default_sizes)
    parser.add_argument("--one", type=int, help=argparse.SUPPRESS)
    for name, default in (extra or {}).items():
        parser.add_argument(f"--{name}", default=default)
    args = parser.parse_args()
    values = {name: getattr(args, name) for name in (extra or {})}
    if args.one:
        print(json.dumps(run_one(args.one, **values)))
        return
    for n in args.sizes:
        command = [sys.executable, script, "--one", str(n)]
        for name, value in values.items():
            command += [f"--{name}", str(value)]
        out = subprocess.run(command, capture_output=True, text=True, check=True)
        print(row(json.loads(out.stdout.strip().splitlines()[-1])))
