"""The plan verifier: accepts valid plans, names the first violation of broken ones.

The valid plans come from ``tests/helpers/plans.py``, which builds routes with
networkx's ``eulerize`` and ``eulerian_circuit`` (not with the project's route
engine or planner), so the verifier is tested against an outside construction.
Each broken plan breaks exactly one invariant; the test checks the verifier
names that one. Plans are broken by editing the plan file's document (as a
person editing the file would) and read back with ``plan_from_dict``.
"""
from __future__ import annotations

import copy

import pytest

from helpers.checks import check_plan_independently
from crewcut.plans.planfile import plan_from_dict, plan_to_dict
from crewcut.plans.verify import check_plan
from crewcut.solve.errors import InputError
from helpers.nets import named_grid
from helpers.plans import make_plan, retotal
from crewcut.solve.profile import Profile


def _profile():
    # the profile helpers.plans.make_plan uses
    return Profile(service_speed_kmh={"default": 6.0}, deadhead_speed_kmh={"default": 25.0})


@pytest.fixture(scope="module")
def valid():
    """The plan file's document of a factory plan, its network and profile."""
    return plan_to_dict(make_plan(k=3)), named_grid(), _profile()


def test_valid_plan_passes(valid):
    plan, net, profile = valid
    check_plan_independently(plan)  # the outside construction is valid by the test's own checker
    assert check_plan(plan_from_dict(plan), net, profile) == []


def _first(plan, net, profile) -> str:
    found = check_plan(plan_from_dict(plan), net, profile)
    assert found, "the verifier accepted a broken plan"
    return str(found[0])


def test_other_network(valid):
    plan, _, profile = valid
    assert "different network" in _first(plan, named_grid(cols=5), profile)


def test_route_not_closed(valid):
    plan, net, profile = valid
    p = copy.deepcopy(plan)
    trs = p["crews"][0]["routes"][0]["traversals"]
    while trs and trs[-1]["from"] == p["crews"][0]["depot_node"]:
        trs.pop()
    trs.pop()
    msg = _first(p, net, profile)
    assert "not at the depot" in msg


def test_steps_not_chained(valid):
    plan, net, profile = valid
    p = copy.deepcopy(plan)
    trs = p["crews"][1]["routes"][0]["traversals"]
    i = next(i for i in range(1, len(trs) - 1) if trs[i]["from"] != trs[i + 1]["from"])
    trs[i], trs[i + 1] = trs[i + 1], trs[i]
    assert "previous step ended" in _first(p, net, profile)


def test_served_by_the_wrong_crew(valid):
    plan, net, profile = valid
    p = copy.deepcopy(plan)
    a, b = p["crews"][0], p["crews"][1]
    s = a["territory"].pop()
    b["territory"].append(s)
    assert f"serves segment {s}, which belongs to" in _first(p, net, profile)


def test_segment_in_two_territories(valid):
    plan, net, profile = valid
    p = copy.deepcopy(plan)
    p["crews"][1]["territory"].append(p["crews"][0]["territory"][0])
    assert "in the territories of both" in _first(p, net, profile)


def test_pass_not_served(valid):
    plan, net, profile = valid
    p = copy.deepcopy(plan)
    segs = p["network"]["segments"]
    t = next(t for t in p["crews"][2]["routes"][0]["traversals"] if t["mode"] == "service")
    t["mode"] = "deadhead"
    t["minutes"] = segs[t["segment"]]["deadhead_min"]
    retotal(p, summary=False)
    assert f"segment {t['segment']}" in _first(p, net, profile)
    assert "exactly once" in _first(p, net, profile)


def test_pass_served_twice(valid):
    plan, net, profile = valid
    p = copy.deepcopy(plan)
    segs = p["network"]["segments"]
    crew = p["crews"][0]
    terr = set(crew["territory"])
    t = next(t for t in crew["routes"][0]["traversals"] if t["mode"] == "deadhead" and t["segment"] in terr)
    t["mode"] = "service"
    t["minutes"] = segs[t["segment"]]["service_min"]
    retotal(p, summary=False)
    assert "exactly once" in _first(p, net, profile)


def test_totals_do_not_add_up(valid):
    plan, net, profile = valid
    p = copy.deepcopy(plan)
    p["crews"][0]["routes"][0]["totals"]["total_min"] += 1.0
    p["crews"][0]["shift_min"] += 1.0  # the shift still adds up: only the route's totals are off
    assert "totals.total_min" in _first(p, net, profile)


def test_shift_does_not_add_up(valid):
    # a crew's shift is the sum of its routes: a file that says otherwise is refused when it is read
    plan, net, profile = valid
    p = copy.deepcopy(plan)
    p["crews"][2]["shift_min"] += 5.0
    with pytest.raises(InputError, match="damaged plan file: crew 'crew-C': shift_min"):
        plan_from_dict(p)


def test_traversal_along_a_segment_it_is_not_on(valid):
    # a traversal must join its segment's two ends: a file that says otherwise is refused when it is read
    plan, net, profile = valid
    p = copy.deepcopy(plan)
    t = p["crews"][0]["routes"][0]["traversals"][3]
    t["segment"] = next(s["id"] for s in p["network"]["segments"]
                        if t["from"] not in (s["from"], s["to"]))
    with pytest.raises(InputError, match="traversal 3 does not match its segment's end nodes"):
        plan_from_dict(p)


def test_wrong_minutes(valid):
    plan, net, profile = valid
    p = copy.deepcopy(plan)
    p["crews"][0]["routes"][0]["traversals"][2]["minutes"] += 0.5
    assert "minutes" in _first(p, net, profile)


def test_plan_made_with_other_speeds(valid):
    # The fingerprint covers topology, not speeds: a plan timed with another profile
    # must not pass against this one (minutes = length / speed, common practice).
    plan, net, profile = valid
    slower = Profile(service_speed_kmh={"default": 5.0}, deadhead_speed_kmh={"default": 25.0})
    # against the config's profile, the recorded setting itself is the first difference named
    assert "service_speed_kmh: plan {default: 6}, config {default: 5}" in _first(plan, net, slower)
    # a plan whose recorded profile says 5 km/h but whose minutes were timed at 6 km/h
    p = copy.deepcopy(plan)
    p["settings"]["profile"]["service_speed_kmh"] = {"default": 5.0}
    assert "service_min" in _first(p, net, slower)


@pytest.mark.parametrize("edit", ["drop_minutes", "crew_not_object", "null_total", "bool_segment"])
def test_malformed_records_are_violations_not_crashes(valid, edit):
    # a hand-edited plan file is bad input: refused when read, with a message naming it, never another
    # exception (the project's bad-input rule: a clear message, exit status 2)
    plan, net, profile = valid
    p = copy.deepcopy(plan)
    if edit == "drop_minutes":
        del p["crews"][0]["routes"][0]["traversals"][1]["minutes"]
    elif edit == "crew_not_object":
        p["crews"][1] = "crew-2"
    elif edit == "null_total":
        p["crews"][0]["routes"][0]["totals"]["total_min"] = None
    else:
        p["crews"][0]["territory"][0] = True
    with pytest.raises(InputError, match="damaged plan file") as exc:
        plan_from_dict(p, "plan.json")
    assert exc.value.message.startswith("plan.json: damaged plan file: ")


# ----------------------------------------------------------------------------- the JSON Schema
def _validate(doc, schema, root, path="$"):
    """The subset of JSON Schema draft 2020-12 that partition/plans/plan.schema.json uses.

    jsonschema is not a dependency; this small walker follows the keyword
    definitions of the draft (json-schema.org, "JSON Schema Validation", 2020-12).
    Yields error strings.
    """
    import re

    if "$ref" in schema:
        ref = schema["$ref"].split("/")[1:]
        target = root
        for part in ref:
            target = target[part]
        yield from _validate(doc, target, root, path)
        return
    types = schema.get("type")
    if types is not None:
        types = [types] if isinstance(types, str) else types
        check = {"object": lambda v: isinstance(v, dict), "array": lambda v: isinstance(v, list),
                 "string": lambda v: isinstance(v, str), "boolean": lambda v: isinstance(v, bool),
                 "integer": lambda v: isinstance(v, int) and not isinstance(v, bool),
                 "number": lambda v: isinstance(v, (int, float)) and not isinstance(v, bool),
                 "null": lambda v: v is None}
        if not any(check[t](doc) for t in types):
            yield f"{path}: {doc!r:.40} is not {types}"
            return
    if "const" in schema and doc != schema["const"]:
        yield f"{path}: not {schema['const']!r}"
    if "enum" in schema and doc not in schema["enum"]:
        yield f"{path}: {doc!r} not in {schema['enum']}"
    if isinstance(doc, (int, float)) and not isinstance(doc, bool):
        if "minimum" in schema and doc < schema["minimum"]:
            yield f"{path}: {doc} < {schema['minimum']}"
        if "maximum" in schema and doc > schema["maximum"]:
            yield f"{path}: {doc} > {schema['maximum']}"
        if "exclusiveMinimum" in schema and doc <= schema["exclusiveMinimum"]:
            yield f"{path}: {doc} <= {schema['exclusiveMinimum']}"
    if isinstance(doc, str) and "pattern" in schema and not re.search(schema["pattern"], doc):
        yield f"{path}: does not match {schema['pattern']}"
    if isinstance(doc, dict):
        for key in schema.get("required", []):
            if key not in doc:
                yield f"{path}: missing '{key}'"
        props = schema.get("properties", {})
        extra = schema.get("additionalProperties", True)
        for key, value in doc.items():
            if key in props:
                yield from _validate(value, props[key], root, f"{path}.{key}")
            elif extra is False:
                yield f"{path}: unexpected key '{key}'"
            elif isinstance(extra, dict):
                yield from _validate(value, extra, root, f"{path}.{key}")
    if isinstance(doc, list):
        if len(doc) < schema.get("minItems", 0) or len(doc) > schema.get("maxItems", len(doc)):
            yield f"{path}: {len(doc)} items"
        if "items" in schema:
            for i, value in enumerate(doc):
                yield from _validate(value, schema["items"], root, f"{path}[{i}]")


def test_plan_matches_its_schema(valid):
    import json
    from pathlib import Path

    schema = json.loads((Path(__file__).resolve().parent.parent / "partition" / "plans" / "plan.schema.json").read_text())
    assert schema["$schema"] == "https://json-schema.org/draft/2020-12/schema"
    plan = json.loads(json.dumps(valid[0]))  # as written to disk
    assert list(_validate(plan, schema, schema)) == []
    broken = copy.deepcopy(plan)
    broken["crews"][0]["routes"][0]["traversals"][0]["mode"] = "sweeping"
    del broken["network"]["segments"][0]["passes"]
    errors = list(_validate(broken, schema, schema))
    assert any("sweeping" in e for e in errors) and any("passes" in e for e in errors)
