"""Invented names for the scenario world: the state, its regions, counties, towns and utilities.

Names are built from a curated list of syllables chosen so that the combinations do not
read like real place names (no "-ton", "-ville", "-field", "-burg", "-land" endings), and a
short list of blocked combinations catches the few that still came out too familiar.
Region names and the state name are fixed words of our own.
"""

from __future__ import annotations

import numpy as np

from impactlink.errors import ProjectError

#: The fictional state (used in the README and the project file only).
STATE_NAME = "Vellmora"

#: Region names, west to east (see ``_geography.assign_regions`` for the layout).
REGION_NAMES = ("Tallgrit", "Ambrel", "Midreach", "Quillow", "Serrowmere")

_HEADS = (
    "Bram", "Corr", "Drev", "Eld", "Fenn", "Gorr", "Isk", "Kest", "Lom", "Marr",
    "Nell", "Orv", "Pell", "Quar", "Rusk", "Sarr", "Tov", "Varr", "Wend", "Yarr",
    "Zell", "Cald", "Grell", "Hask", "Oss", "Trel", "Vesk", "Brisk", "Ulm", "Thorn",
)
_TAILS = (
    "amere", "ick", "ova", "eth", "orra", "undle", "iska", "endel", "issa", "ombe",
    "ith", "avar", "ennet", "ulme", "arrow", "idge", "oune", "esk", "alder", "iven",
)
#: Middle syllables of the three-syllable names used when a large world needs more names
#: than the two-syllable pool holds (head + middle + tail, e.g. "Kest" + "al" + "ova").
_MIDS = ("a", "e", "o", "al", "en", "ir", "ul", "or", "is", "am", "ev", "ot")
#: Combinations that read too much like familiar names; never used.
_BLOCKED = frozenset({"Thornidge", "Bramidge", "Marrow", "Orvith", "Kestrel"})

_UTILITY_FORMS = (
    "{} Municipal Water",
    "{} Water Authority",
    "{} Rural Water Cooperative",
    "{} Public Utilities",
    "{} Waterworks",
)


def invent_names(n: int, rng: np.random.Generator, *, exclude: frozenset[str] = frozenset()
                 ) -> list[str]:
    """Return ``n`` distinct invented names.

    Small worlds use two-syllable names (head + tail) with at most three names per head
    syllable, so neighbouring counties read differently. When ``n`` exceeds what that pool
    can give, the names come from the larger three-syllable pool (head + middle + tail,
    about 7 000 names) instead, in a random order.

    Parameters
    ----------
    n : int
        How many names.
    rng : numpy.random.Generator
        Source of randomness (the scenario's single generator).
    exclude : frozenset of str
        Names already used elsewhere in the world.

    Raises
    ------
    ProjectError
        If even the three-syllable pool holds fewer than ``n`` names.
    """
    pool = [h + t for h in _HEADS for t in _TAILS]
    pool = [p for p in pool if p not in _BLOCKED and p not in exclude]
    per_head = [sum(p.startswith(h) for p in pool) for h in _HEADS]
    if n <= sum(min(3, k) for k in per_head):
        return _two_syllable(n, pool, rng)
    big = list(dict.fromkeys(h + m + t for h in _HEADS for m in _MIDS for t in _TAILS))
    big = [p for p in big if p not in _BLOCKED and p not in exclude]
    if n > len(big):
        raise ProjectError(f"invent_names: asked for n={n} names; only {len(big)} available "
                           "(three-syllable pool); add syllables to _names.py")
    order = rng.permutation(len(big))[:n]
    return [big[i] for i in order]


def _two_syllable(n: int, pool: list[str], rng: np.random.Generator) -> list[str]:
    """``n`` names of the two-syllable pool, at most three per head syllable."""
    order = rng.permutation(len(pool))
    # Avoid two names in a row sharing a head so neighbouring counties read differently.
    chosen: list[str] = []
    used_heads: dict[str, int] = {}
    for i in order:
        name = pool[i]
        head = next(h for h in _HEADS if name.startswith(h))
        if used_heads.get(head, 0) >= 3:
            continue
        used_heads[head] = used_heads.get(head, 0) + 1
        chosen.append(name)
        if len(chosen) == n:
            break
    return chosen


def utility_name(town: str, rng: np.random.Generator) -> str:
    """An invented utility name for ``town``."""
    form = _UTILITY_FORMS[int(rng.integers(len(_UTILITY_FORMS)))]
    return form.format(town)
