"""The face for Python users (``import crewcut``) and ``python -m crewcut``.

The docstring examples of :mod:`crewcut` and :mod:`crewcut.api` run as doctests;
the example script plans, replans and writes a table from Python; the replanned
plan it makes is checked with the independent checker of the tests
(helpers.checks, networkx's Euler and connectivity functions). The lazy face is
checked by importing the engine alone in a fresh interpreter (common practice,
no source).
"""
from __future__ import annotations

import doctest
import json
import subprocess
import sys
from pathlib import Path

import crewcut
import crewcut.api

ROOT = Path(__file__).resolve().parent.parent


def test_doctests_of_the_face_run():
    for module in (crewcut, crewcut.api):
        result = doctest.testmod(module, optionflags=doctest.ELLIPSIS)
        assert result.attempted > 0 and result.failed == 0, module.__name__


def test_every_public_name_resolves():
    for name in crewcut.__all__:
        assert getattr(crewcut, name) is not None
    assert set(crewcut.api.__all__) <= set(crewcut.__all__)


def test_example_script_plans_replans_and_writes_a_table(tmp_path):
    from helpers.checks import check_plan_independently

    done = subprocess.run([sys.executable, str(ROOT / "examples" / "plan_in_python.py"), str(tmp_path)],
                          capture_output=True, text=True, timeout=300)
    assert done.returncode == 0, done.stderr
    assert "violations: none" in done.stdout and "| crew-1 |" in done.stdout
    assert (tmp_path / "today.md").read_text().startswith("| crew |")
    for name in ("plan.json", "today.json"):
        check_plan_independently(json.loads((tmp_path / name).read_text(encoding="utf-8")))


def test_python_m_crewcut_and_a_light_engine_import():
    done = subprocess.run([sys.executable, "-m", "crewcut", "--version"], capture_output=True, text=True)
    assert done.returncode == 0 and done.stdout.startswith("crewcut ")
    probe = ("import sys, crewcut.solve.route; "
             "print(sorted(m for m in sys.modules if m.startswith('crewcut.') and not m.startswith('crewcut.solve')))")
    done = subprocess.run([sys.executable, "-c", probe], capture_output=True, text=True)
    assert done.returncode == 0 and done.stdout.strip() == "[]", done.stdout + done.stderr
