"""Checking a plan file against a street network and a work profile, independently of the planner.

``verify`` trusts nothing in the plan that it can derive again. The network file
and the profile are the truth: the config's profile when one is given (then the
plan's recorded profile must equal it), else the plan's own recorded settings
(:func:`profile_of_plan`; :attr:`Verdict.profile_from` says which). Nothing here
calls the planner, the balancer or the replanner: the checks read the plan
(:class:`crewcut.plans.model.Plan`) and the network model and test the
invariants directly, using the route engine's own definitions only where the
plan must follow them (the turn model, the lower bound). Records not shaped as
crewcut writes them never get here: the plan file's reader refuses them
(:func:`crewcut.plans.planfile.read_plan`).

In order, the first violation found is reported:

1. the recorded profile against the truth (:mod:`crewcut.plans.verify_settings`);
   what the plan serves: the service area and the left-out list, re-derived
   (:mod:`crewcut.plans.verify_scope`);
2. the plan's copy of the network: fingerprint, ends, lengths, one-way flags,
   closures, node positions and labels, feature ids, names, road classes,
   service kinds, drawn lines, passes, service and deadhead minutes
   (:mod:`crewcut.plans.verify_network`);
3. crews: shift limits, depots, against the config's crews when it defines them;
   the defer list and its policy (:mod:`crewcut.plans.verify_settings`);
4. territories, routes, traversals, turns, forbidden turns (the network file's
   turn restrictions), route totals, coverage
   (:mod:`crewcut.plans.verify_routes`); with capacities, the loads, facility
   visits and their hours (:mod:`crewcut.plans.verify_trips`);
5. the summary's figures, the crews over their limits, the lower bound and the
   gap (:mod:`crewcut.plans.verify_figures`).

What verify cannot know is in the README ("What verify guarantees, and what it
cannot know").
"""
from __future__ import annotations

from dataclasses import dataclass

from crewcut.solve.costs import required_passes
from crewcut.solve.network.model import Network
from crewcut.solve.profile import Profile
from crewcut.solve.readers.area import ServiceArea

from crewcut.plans.model import Plan
from crewcut.plans.verify_figures import check_figures
from crewcut.plans.verify_cycle import check_cycle
from crewcut.plans.verify_network import check_network
from crewcut.plans.verify_routes import check_routes
from crewcut.plans.verify_trips import check_trips
from crewcut.plans.verify_scope import scope_truth
from crewcut.plans.verify_settings import check_crews, check_deferred, check_profile, profile_differences
from crewcut.plans.violation import Violation

__all__ = ["PROFILE_FROM_CONFIG", "PROFILE_FROM_PLAN", "Overview", "Verdict", "Violation", "check_plan",
           "plan_overview", "profile_differences", "profile_of_plan", "verify_plan"]

PROFILE_FROM_CONFIG = "config"
PROFILE_FROM_PLAN = "plan"


@dataclass(frozen=True)
class Verdict:
    """What :func:`verify_plan` found.

    ``violations``: empty when the plan is valid (just the first one with
    ``first_only``). ``profile_from``: ``"config"`` when the plan was checked
    against a config's profile, ``"plan"`` when against the plan's own recorded
    settings (which then cannot be wrong by construction: the speeds, turn
    penalties and service rules were taken on trust). ``profile``: the profile used.
    """

    violations: tuple[Violation, ...]
    profile_from: str
    profile: Profile

    @property
    def valid(self) -> bool:
        return not self.violations


def verify_plan(plan: Plan, net: Network, config: Profile | None = None, *, first_only: bool = True,
                area: ServiceArea | None = None) -> Verdict:
    """Check ``plan`` against ``net`` and, when given, the config's profile ``config``.

    Parameters
    ----------
    plan : the plan as read from its file.
    net : the network read from the network file (with ``config`` when given, else with the
        plan's own profile, :func:`profile_of_plan`).
    config : the work profile that is the truth; ``None`` checks against the plan's recorded settings.
    first_only : stop at the first violation.
    area : the service area the plan must have been made for (default: the config's
        ``network.service_area``, else the plan's recorded area).
    """
    profile = config if config is not None else profile_of_plan(plan)
    found = check_plan(plan, net, profile, first_only=first_only, from_config=config is not None, area=area)
    return Verdict(tuple(found), PROFILE_FROM_CONFIG if config is not None else PROFILE_FROM_PLAN, profile)


def check_plan(plan: Plan, net: Network, profile: Profile, *, first_only: bool = True,
               from_config: bool = True, area: ServiceArea | None = None) -> list[Violation]:
    """All violations found against ``net`` and ``profile`` (just the first one with ``first_only``).

    ``profile`` is the truth: the plan's recorded profile must equal it.
    ``from_config``: ``profile`` came from a config, so its crews (if any) are the
    truth for the crews' depots and shift limits too.
    """
    out: list[Violation] = []
    for v in _checks(plan, net, profile, from_config, area):
        out.append(v)
        if first_only:
            break
    return out


def _checks(plan: Plan, net: Network, profile: Profile, from_config: bool, area: ServiceArea | None):
    v = next(check_profile(plan, profile), None)
    if v is not None:
        yield v
        return
    truth = scope_truth(plan, net, profile, area)
    if truth.violation is not None:
        yield truth.violation
        return
    net = truth.network
    for part in (check_network(plan, net, profile),
                 check_crews(plan, net, profile, from_config)):
        v = next(part, None)
        if v is not None:
            yield v
            return
    need = required_passes(net, profile).total > 0
    v = next(check_deferred(plan, net, profile, need), None)
    if v is not None:
        yield v
        return
    deferred = {d.segment for d in plan.deferred or ()}
    for part in (check_routes(plan, net, profile, deferred), check_trips(plan, net, profile),
                 check_cycle(plan, net, profile),
                 check_figures(plan, net, profile)):
        v = next(part, None)
        if v is not None:
            yield v
            return


def profile_of_plan(plan: Plan, base: Profile | None = None) -> Profile:
    """The profile a plan was made with: its recorded fields on ``base`` (default: the built-in defaults).

    ``base`` gives what a plan does not record (the config's crews and source file).
    """
    base = base or Profile()
    return plan.settings.profile.with_recorded(base)


@dataclass(frozen=True)
class Overview:
    """A plan at a glance: crews, traversals, segments in territories, the longest shift."""

    crews: int
    traversals: int
    segments: int
    longest_min: float


def plan_overview(plan: Plan) -> Overview:
    shifts = [c.shift_min for c in plan.crews]
    if plan.settings.options.cycle is not None:  # a cycle plan's shift is a day
        shifts = [c.longest_day_min for c in plan.crews]
    return Overview(crews=len(plan.crews), traversals=sum(len(r.traversals) for c in plan.crews for r in c.routes),
                    segments=sum(len(c.territory) for c in plan.crews),
                    longest_min=max(shifts) if shifts else 0.0)
