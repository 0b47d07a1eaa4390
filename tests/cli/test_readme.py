"""The README's examples run as printed (on a copy of the demo DEM named as in the README)."""

from __future__ import annotations

import os
import re
import shlex
import shutil
import subprocess
import sys
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[2]


def _usage_lines() -> list[str]:
    text = (ROOT / "README.md").read_text(encoding="utf-8")
    section = text.split("## Using it", 1)[1].split("##", 1)[0]
    lines = [re.split(r"\s#\s", ln.strip(), maxsplit=1)[0].strip() for ln in section.splitlines()
             if ln.startswith("    divides ")]
    return [ln for ln in lines if "COMMAND" not in ln]


def _python_block() -> str:
    text = (ROOT / "README.md").read_text(encoding="utf-8")
    return re.search(r"```python\n(.*?)```", text, re.S).group(1)


def test_the_readme_shows_the_commands():
    assert [ln.split()[1] for ln in _usage_lines()] == ["inspect", "assess", "assess", "forecast", "screen"]


@pytest.mark.slow
def test_readme_examples_run_as_printed(tmp_path):
    (tmp_path / "demo").mkdir()
    shutil.copy(ROOT / "demo" / "uplands.tif", tmp_path / "demo" / "uplands.tif")
    shutil.copy(ROOT / "demo" / "uplands.tif", tmp_path / "mydem.tif")
    env = {**os.environ, "PYTHONPATH": str(ROOT)}
    for line in _usage_lines():
        argv = shlex.split(line)
        proc = subprocess.run([sys.executable, "-m", "divides", *argv[1:]], cwd=tmp_path, env=env,
                              capture_output=True, text=True, timeout=900, check=False)
        assert proc.returncode == 0, (line, proc.stderr[-2000:])
    assert {p.name for p in tmp_path.iterdir()} >= {"divides-mydem-assess", "divides-mydem-screen",
                                                    "divides-mydem-forecast", "named"}
    proc = subprocess.run([sys.executable, "-c", _python_block()], cwd=tmp_path, env=env, capture_output=True,
                          text=True, timeout=900, check=False)
    assert proc.returncode == 0, proc.stderr[-2000:]
    assert (tmp_path / "uplands-from-python" / "summary.json").is_file()
