"""Helpers of the command-line and report tests: run `stillroom` in a subprocess, read images.

The command line runs as ``python -m optimise.cli`` with the repository on
``PYTHONPATH``, so the tests need no ``pip install``.
"""

from __future__ import annotations

import json
import os
import re
import struct
import subprocess
import sys
from functools import cache
from pathlib import Path

REPO = Path(__file__).resolve().parents[2]
SCHEMA_PATH = REPO / "optimise" / "schema.json"


def run_cli(*args, cwd, timeout: float = 300) -> subprocess.CompletedProcess:
    """Run ``stillroom ARGS`` in ``cwd``; returns the finished process (text output)."""
    env = dict(os.environ)
    env["PYTHONPATH"] = os.pathsep.join([str(REPO), env.get("PYTHONPATH", "")]).rstrip(os.pathsep)
    env["COLUMNS"] = "160"
    return subprocess.run(
        [sys.executable, "-m", "optimise.cli", *map(str, args)],
        cwd=cwd,
        env=env,
        capture_output=True,
        text=True,
        timeout=timeout,
        stdin=subprocess.DEVNULL,
    )


@cache
def schema() -> dict:
    return json.loads(SCHEMA_PATH.read_text(encoding="utf-8"))


def validate(document, kind: str | None = None) -> None:
    """Validate against optimise/schema.json (and check the document's kind)."""
    import jsonschema

    jsonschema.Draft202012Validator(schema()).validate(document)
    if kind is not None:
        assert document["kind"] == kind


def png_size(path) -> tuple[int, int]:
    """Width and height in pixels from a PNG's IHDR chunk (PNG specification, section 11.2.2)."""
    data = Path(path).read_bytes()
    assert data[:8] == b"\x89PNG\r\n\x1a\n", f"{path} is not a PNG file"
    assert data[12:16] == b"IHDR"
    return struct.unpack(">II", data[16:24])


def svg_size(path) -> tuple[float, float]:
    """Width and height of an SVG's root element, in points."""
    text = Path(path).read_text(encoding="utf-8")
    root = re.search(r"<svg\b[^>]*>", text)
    assert root, f"{path} has no <svg> element"
    width = re.search(r'\bwidth="([\d.]+)pt"', root.group(0))
    height = re.search(r'\bheight="([\d.]+)pt"', root.group(0))
    assert width and height, f"{path}: no width/height in points on <svg>"
    return float(width.group(1)), float(height.group(1))


def files_under(folder) -> list[str]:
    """Every file below ``folder``, as sorted relative paths."""
    folder = Path(folder)
    return sorted(str(p.relative_to(folder)) for p in folder.rglob("*") if p.is_file())
