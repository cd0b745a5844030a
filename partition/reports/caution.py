"""The cautions every route sheet, map and printed report page carries.

Heavy vehicles in streets can hurt people. A plan is a planning aid: the wording
follows the README's "Cautions" and defers to local codes, traffic law and
licensed practice (common practice for printed route material, no source).
"""
from __future__ import annotations

CAUTION = ("Planning aid, not driving instructions: follow traffic law, signs and the conditions you find; "
           "never make an unsafe manoeuvre to follow this plan; local codes, the traffic authority and "
           "licensed practice come first.")
SHORT_CAUTION = "Planning aid only: traffic law, signs, local codes and licensed practice come first."
