"""Joint-name evidence: tokens, side markers and anatomical words.

Names are split at separators, camelCase humps and digits, then side markers are recognised in the
common styles: words (Left, right), letters as prefix or suffix (L_, _r, .L, lShin), short forms
(Lf, Rt), and a letter glued to a known body word (lfemur, rtibia).
"""

from __future__ import annotations

import re
from functools import lru_cache

__all__ = ["tokenize", "side_of_name", "strip_side", "BODY_WORDS"]

_LEFT = {"l", "left", "lf", "lft", "lt"}
_RIGHT = {"r", "right", "rt", "rgt", "ri"}

# Words that mark a body part; a one-letter side glued in front of one of these is a side marker.
BODY_WORDS = frozenset("""
hip hips pelvis root spine chest thorax abdomen back lowerback upperback torso belly waist
neck head skull jaw eye ear nose
clavicle collar shoulder scapula shldr upperarm arm humerus elbow forearm radius ulna wrist hand palm
thumb index middle mid ring pinky little finger fingers
thigh upleg upperleg femur buttock knee shin calf leg lowerleg tibia ankle foot heel ball toe toes
hipjoint twist tail
""".split())

_SPLIT = re.compile(r"[^A-Za-z0-9]+")
_CAMEL = re.compile(r"[A-Z]+(?=[A-Z][a-z])|[A-Z]?[a-z]+|[A-Z]+|\d+")


@lru_cache(maxsize=4096)
def tokenize(name: str) -> tuple[str, ...]:
    """Lower-case tokens of a joint name: "LeftUpLeg_02" -> ("left", "up", "leg", "02")."""
    out: list[str] = []
    for part in _SPLIT.split(name):
        if not part:
            continue
        out.extend(t.lower() for t in _CAMEL.findall(part))
    return tuple(out)


def _glued_side(token: str) -> str | None:
    if len(token) > 2 and token[0] in "lr" and token[1:] in BODY_WORDS:
        return "left" if token[0] == "l" else "right"
    return None


@lru_cache(maxsize=4096)
def side_of_name(name: str) -> str | None:
    """'left', 'right' or None when the name carries no side marker."""
    toks = tokenize(name)
    if not toks:
        return None
    found: set[str] = set()
    for i, t in enumerate(toks):
        if t in ("left",):
            found.add("left")
        elif t in ("right",):
            found.add("right")
        elif t in _LEFT and (i == 0 or i == len(toks) - 1):
            found.add("left")
        elif t in _RIGHT and (i == 0 or i == len(toks) - 1):
            found.add("right")
        else:
            g = _glued_side(t)
            if g and (i == 0):
                found.add(g)
    if len(found) == 1:
        return found.pop()
    return None


def strip_side(name: str) -> tuple[str, ...]:
    """Tokens of a name without its side marker: "lShldr" -> ("shldr",), "Hand_R" -> ("hand",)."""
    toks = list(tokenize(name))
    side = side_of_name(name)
    if side is None:
        return tuple(toks)
    out = []
    for i, t in enumerate(toks):
        if t in ("left", "right"):
            continue
        if (t in _LEFT or t in _RIGHT) and (i == 0 or i == len(toks) - 1):
            continue
        if i == 0 and _glued_side(t):
            out.append(t[1:])
            continue
        out.append(t)
    return tuple(out)
