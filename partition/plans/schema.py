"""Checking a plan document against its JSON Schema (``plan.schema.json``) before anything reads it.

Problem: a hand-edited or damaged plan file (a name that is a list, totals as
text, settings as a list, a longitude of 1e300) must be refused with the place
named, before a report or a replan trips over it.

Method: the schema is compiled once into nested checking functions, one per
schema node, for the keywords the schema uses (``type``, ``const``, ``enum``,
``minimum``, ``maximum``, ``exclusiveMinimum``, ``pattern``, ``required``,
``properties``, ``additionalProperties``, ``items``, ``minItems``, ``maxItems``,
``$ref`` to ``$defs``), following their definitions in JSON Schema draft 2020-12
("JSON Schema Validation", json-schema.org). A number must also be finite: JSON
has no infinities, and Python's reader turns ``1e400`` into one. The first
violation is returned with its JSON path, e.g. ``$.crews[2].routes[0].totals.total_min``.
"""
from __future__ import annotations

import json
import math
import re
from functools import lru_cache
from importlib import resources
from typing import Callable

Check = Callable[[object, Callable[[], str]], "str | None"]

_TYPES: dict[str, Callable[[object], bool]] = {
    "object": lambda v: isinstance(v, dict),
    "array": lambda v: isinstance(v, list),
    "string": lambda v: isinstance(v, str),
    "boolean": lambda v: isinstance(v, bool),
    "integer": lambda v: isinstance(v, int) and not isinstance(v, bool),
    "number": lambda v: isinstance(v, (int, float)) and not isinstance(v, bool)
    and (isinstance(v, int) or math.isfinite(v)),
    "null": lambda v: v is None,
}


def _short(value) -> str:
    text = json.dumps(value, ensure_ascii=False, default=str) if not isinstance(value, float) else repr(value)
    return text if len(text) <= 40 else text[:37] + "..."


class _Compiler:
    def __init__(self, root: dict) -> None:
        self.root = root
        self.refs: dict[str, Check] = {}

    def ref(self, pointer: str) -> Check:
        if pointer not in self.refs:
            self.refs[pointer] = lambda v, p: None  # placeholder while compiling (recursive $defs)
            node = self.root
            for part in pointer.split("/")[1:]:
                node = node[part]
            compiled = self.compile(node)
            self.refs[pointer] = compiled
        cell = self.refs
        return lambda v, p: cell[pointer](v, p)

    def compile(self, s: dict) -> Check:
        if "$ref" in s:
            return self.ref(s["$ref"])
        checks: list[Check] = []
        if "type" in s:
            names = [s["type"]] if isinstance(s["type"], str) else list(s["type"])
            tests = [_TYPES[n] for n in names]
            checks.append(lambda v, p, tests=tests, names=names: None if any(t(v) for t in tests)
                          else f"{p()} is {_short(v)}, not {' or '.join(names)}")
        if "const" in s:
            c = s["const"]
            checks.append(lambda v, p, c=c: None if v == c else f"{p()} is {_short(v)}, not {c!r}")
        if "enum" in s:
            allowed = s["enum"]
            checks.append(lambda v, p, a=allowed: None if v in a else f"{p()} is {_short(v)}, not one of {a}")
        for key, op in (("minimum", lambda v, b: v >= b), ("maximum", lambda v, b: v <= b),
                        ("exclusiveMinimum", lambda v, b: v > b)):
            if key in s:
                bound = s[key]
                checks.append(lambda v, p, b=bound, op=op, key=key: None if not _TYPES["number"](v) or op(v, b)
                              else f"{p()} is {_short(v)}; {key} is {b}")
        if "pattern" in s:
            rx = re.compile(s["pattern"])
            checks.append(lambda v, p, rx=rx: None if not isinstance(v, str) or rx.search(v)
                          else f"{p()} does not match {rx.pattern}")
        if any(k in s for k in ("required", "properties", "additionalProperties")):
            checks.append(self._object(s))
        if any(k in s for k in ("items", "minItems", "maxItems")):
            checks.append(self._array(s))

        def run(v, p, checks=checks):
            for c in checks:
                err = c(v, p)
                if err:
                    return err
            return None
        return run

    def _object(self, s: dict) -> Check:
        required = list(s.get("required", ()))
        props = {k: self.compile(v) for k, v in s.get("properties", {}).items()}
        extra = s.get("additionalProperties", True)
        extra_check = self.compile(extra) if isinstance(extra, dict) else None

        def check(v, p):
            if not isinstance(v, dict):
                return None
            for key in required:
                if key not in v:
                    return f"{p()} has no '{key}'"
            for key, value in v.items():
                sub = props.get(key)
                if sub is None:
                    if extra is False:
                        return f"{p()} has an unexpected key '{key}'"
                    sub = extra_check
                if sub is not None:
                    err = sub(value, lambda key=key: f"{p()}.{key}")
                    if err:
                        return err
            return None
        return check

    def _array(self, s: dict) -> Check:
        item = self.compile(s["items"]) if isinstance(s.get("items"), dict) else None
        lo, hi = s.get("minItems"), s.get("maxItems")

        def check(v, p):
            if not isinstance(v, list):
                return None
            if lo is not None and len(v) < lo:
                return f"{p()} has {len(v)} items; at least {lo} are needed"
            if hi is not None and len(v) > hi:
                return f"{p()} has {len(v)} items; at most {hi} are allowed"
            if item is not None:
                for i, x in enumerate(v):
                    err = item(x, lambda i=i: f"{p()}[{i}]")
                    if err:
                        return err
            return None
        return check


@lru_cache(maxsize=1)
def _plan_check() -> Check:
    schema = json.loads(resources.files("crewcut.plans").joinpath("plan.schema.json").read_text(encoding="utf-8"))
    return _Compiler(schema).compile(schema)


def schema_problem(doc) -> str | None:
    """The first place where ``doc`` breaks ``plan.schema.json``, as a message with its JSON path; None if none."""
    return _plan_check()(doc, lambda: "$")
