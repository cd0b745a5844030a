"""Invented street names for the demo towns: plain words and made-up syllables, never a real place.

Every distinct street (a key) gets one name, drawn in a seeded order, with a
suffix that fits its kind (``NAME_KINDS``): a lane or row for an ordinary street,
a road or avenue for an arterial, a close for a cul-de-sac, a crescent, a mews
for a service lane. When the stems run out, a qualifier ("Upper", "Old", ...)
keeps the names apart.
"""
from __future__ import annotations

import numpy as np

# kinds of street, in the order of the generator's kind codes
NAME_KINDS = ("line", "arterial", "spur", "crescent", "lane")

# Names are invented: plain words and made-up syllables, never a real place.
_WORDS = (
    "Tallow", "Lantern", "Thimble", "Kestrel", "Bracken", "Cobble", "Pewter", "Saffron", "Wicker",
    "Heron", "Millrace", "Tinder", "Furrow", "Sorrel", "Cinder", "Flax", "Nettle", "Spindle",
    "Gorse", "Juniper", "Linden", "Teasel", "Umber", "Vetch", "Yarrow", "Brindle", "Dapple",
    "Ember", "Fallow", "Garnet", "Kiln", "Loom", "Mallow", "Nutmeg", "Ochre", "Plover", "Quince",
    "Russet", "Sedge", "Tansy", "Verdigris", "Bobbin", "Chandler", "Dovetail", "Flint", "Gimlet",
    "Hopper", "Inkpot", "Jackdaw", "Ladle", "Mortar", "Oakum", "Pumice", "Quern", "Rushlight",
    "Skein", "Trowel", "Whetstone", "Lichen", "Coracle",
)
_ONSETS = ("Bal", "Cor", "Dun", "Fen", "Gal", "Har", "Kel", "Lor", "Mar", "Nor", "Pel", "Quen",
           "Ros", "Sel", "Tam", "Vel", "Wen", "Yar", "Brem", "Orl")
_ENDINGS = ("vane", "quist", "ollow", "emmer", "isk", "andel", "orrow", "upple", "ethy", "arric",
            "immel", "ossa", "ennet", "ibble")
_QUALIFIERS = ("", "Upper ", "Lower ", "Little ", "Old ", "New ", "Far ", "Near ")
_SUFFIXES = {
    "line": ("Lane", "Row", "Way", "Street", "Terrace", "Grove"),
    "arterial": ("Road", "Avenue", "Parade"),
    "spur": ("Close", "Court", "End"),
    "crescent": ("Crescent",),
    "lane": ("Mews", "Passage", "Yard"),
}


def street_names(keys: np.ndarray, kinds: np.ndarray, rng: np.random.Generator) -> list[str]:
    """One invented name per distinct key, in a seeded order."""
    stems = list(_WORDS) + [o + e for o in _ONSETS for e in _ENDINGS]
    uk, first = np.unique(keys, return_index=True)
    kind_of = kinds[first]
    perm = rng.permutation(len(stems))
    by_key: dict[int, str] = {}
    counters = {k: 0 for k in range(len(NAME_KINDS))}
    for key, kind in zip(uk.tolist(), kind_of.tolist()):
        n = counters[kind]
        counters[kind] += 1
        sufs = _SUFFIXES[NAME_KINDS[kind]]
        stem = stems[perm[(n * 7919 + kind * 31) % len(stems)]]
        rnd = n // len(stems)
        suffix = sufs[(n + rnd) % len(sufs)]
        qual = _QUALIFIERS[(rnd // len(sufs)) % len(_QUALIFIERS)] if rnd >= len(sufs) else ""
        by_key[key] = f"{qual}{stem} {suffix}"
    return [by_key[k] for k in keys.tolist()]
