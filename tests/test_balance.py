"""Planning and balancing on many generated networks: invariants and the lower bound.

Each plan is checked from the plan file alone (``helpers.checks.check_plan_independently``):
every required pass served exactly once, closed walks from the crews' own depots,
legal directions; territories connected (networkx); and the longest shift never
below the min-max lower bound recomputed with networkx (``helpers.checks.nx_lower_bound``,
after Ahr and Reinelt 2006, from memory).
"""
from __future__ import annotations

import numpy as np
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from helpers.checks import check_plan_independently, nx_lower_bound, territory_connected
from helpers.nets import repaired_grid
from crewcut.fleet.crews import resolve_crews
from crewcut.fleet.planner import plan_fleet
from crewcut.plans.planfile import plan_to_dict
from crewcut.plans.verify import check_plan
from crewcut.solve.profile import Crew, Profile


def _plan(net, profile, crews, **kw):
    """The plan, and its file's document (what the independent checkers read)."""
    kw.setdefault("workers", 1)
    kw.setdefault("time_limit_s", 20.0)
    typed = plan_fleet(net, profile, crews, **kw)
    assert check_plan(typed, net, profile) == []
    return plan_to_dict(typed)


def _check(plan, net, profile):
    check_plan_independently(plan)
    for i in range(len(plan["crews"])):
        assert territory_connected(plan, i), plan["crews"][i]["id"]
    s = plan["summary"]
    assert s["longest_min"] >= nx_lower_bound(plan) - 1e-6
    assert s["longest_min"] >= s["lower_bound_min"] - 1e-6


@settings(max_examples=6, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(seed=st.integers(0, 10_000), k=st.integers(2, 4), ignore_oneway=st.booleans())
def test_generated_networks(seed, k, ignore_oneway):
    profile = Profile(ignore_oneway=ignore_oneway, shift_limit_min=1440.0)
    net = repaired_grid(8, 6, seed)
    crews = resolve_crews(net, profile, k=k, depot_lonlat=(-30.5, 45.2))
    plan = _plan(net, profile, crews, seed=seed)
    _check(plan, net, profile)
    b = plan["summary"]["balance"]
    assert b["after_longest_min"] <= b["before_longest_min"] + 1e-9  # kept moves never lengthen the longest


def test_several_depots_and_limits():
    profile = Profile(crews=(Crew("west", 480.0, depot_lonlat=(-30.505, 45.2)),
                             Crew("east", 480.0, depot_lonlat=(-30.495, 45.2)),
                             Crew("half-day", 240.0, depot_lonlat=(-30.5, 45.203))))
    net = repaired_grid(14, 8, 4)
    crews = resolve_crews(net, profile)
    plan = _plan(net, profile, crews)
    _check(plan, net, profile)
    by_id = {c["id"]: c for c in plan["crews"]}
    assert {c["depot_node"] for c in plan["crews"]} == {c.depot_node for c in crews}
    # the half-day crew is balanced on its share of its own limit, so it carries less
    assert by_id["half-day"]["shift_min"] < min(by_id["west"]["shift_min"], by_id["east"]["shift_min"])


def test_balancer_evens_out_shifts():
    profile = Profile(shift_limit_min=1440.0)
    net = repaired_grid(14, 9, 8, drop=0.05)
    crews = resolve_crews(net, profile, k=4, depot_lonlat=(-30.5, 45.2))
    plan = _plan(net, profile, crews)
    _check(plan, net, profile)
    s = plan["summary"]
    print(f"\nlongest/mean {s['longest_over_mean']:.3f}, gap {s['gap']:.3f}, balance {s['balance']}")
    assert s["longest_over_mean"] <= 1.10


def test_time_limit_zero_still_gives_a_valid_plan():
    profile = Profile(shift_limit_min=1440.0)
    net = repaired_grid(8, 5, 1)
    crews = resolve_crews(net, profile, k=3, depot_lonlat=(-30.5, 45.2))
    plan = _plan(net, profile, crews, time_limit_s=0.0)
    _check(plan, net, profile)
    assert plan["summary"]["balance"]["stop"] in ("time limit", "tolerance")


def test_over_limit_flagged_with_minutes_and_crews_needed():
    profile = Profile(shift_limit_min=60.0)
    net = repaired_grid(10, 6, 3)
    crews = resolve_crews(net, profile, k=2, depot_lonlat=(-30.5, 45.2))
    plan = _plan(net, profile, crews)
    s = plan["summary"]
    over = {o["crew"]: o["over_min"] for o in s["over_limit"]}
    for c in plan["crews"]:
        if c["shift_min"] > 60.0:
            assert over[c["id"]] == pytest.approx(c["shift_min"] - 60.0, abs=1e-3)
    # work that takes T minutes needs at least T / 60 one-hour crews (counting argument)
    assert s["crews_needed_estimate"] >= np.ceil(s["total_shift_min"] / 60.0 - 1e-9)
