"""Reading plan files: damaged files are refused up front by every command that reads one."""
from __future__ import annotations

import copy
import json

import pytest

from crewcut.cli.main import main
from crewcut.plans.planfile import read_plan, write_plan
from helpers.plans import make_plan
from crewcut.solve.errors import InputError


def _damage(plan: dict, how: str) -> dict:
    p = copy.deepcopy(plan)
    if how == "territory_text":
        p["crews"][0]["territory"][0] = "seven"
    elif how == "traversal_without_minutes":
        del p["crews"][1]["routes"][0]["traversals"][3]["minutes"]
    elif how == "segment_not_object":
        p["network"]["segments"][2] = 17
    elif how == "crews_not_list":
        p["crews"] = {"a": 1}
    elif how == "bad_mode":
        p["crews"][0]["routes"][0]["traversals"][0]["mode"] = "sweep"
    return p


@pytest.mark.parametrize("how", ["territory_text", "traversal_without_minutes", "segment_not_object",
                                 "crews_not_list", "bad_mode"])
def test_damaged_plan_is_refused_by_every_reader(tmp_path, capsys, how):
    plan = make_plan(k=3)
    path = tmp_path / "plan.json"
    path.write_text(json.dumps(_damage(plan, how)))
    before = path.read_bytes()
    with pytest.raises(InputError, match="damaged plan file"):
        read_plan(path)
    for argv in (["table", str(path)], ["rebalance", str(path), "--absent", "crew-1", "--out", str(tmp_path / "o")],
                 ["export", str(path), "--format", "csv", "--out", str(tmp_path / "x.csv")]):
        assert main(argv) == 2
        err = capsys.readouterr().err
        assert "damaged plan file" in err and "Traceback" not in err
    assert path.read_bytes() == before
    assert not (tmp_path / "o").exists() and not (tmp_path / "x.csv").exists()


def test_written_plan_reads_back_unchanged(tmp_path):
    plan = make_plan(k=2)
    path = write_plan(plan, tmp_path / "plan.json")
    assert read_plan(path) == json.loads(path.read_text())
