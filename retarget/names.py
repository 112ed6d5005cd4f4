"""Joint-name evidence: tokens, side markers and anatomical words.

Names are split at separators, camelCase humps and digits, then side markers are recognised in the
common styles: words (Left, right, LeftHand, hand_left, leftarm), letters as prefix or suffix (L_, _r,
.L, lShin, HandR), letters standing alone between separators (Rig01 L Thigh, Ch_Base_L_Hand), short forms
(Lf, Rt, Lt, Lft, Rgt), and a letter glued to a known body word (lfemur, rtibia).

Body words are gathered into concepts (``concepts_of``): the anatomical part a joint moves, whatever the
naming style calls it - thigh / upper leg / up leg / femur / hip joint, shin / calf / lower leg / knee /
tibia, collar / clavicle, ... - with the H-Anim (ISO/IEC 19774) joint names as part of the vocabulary.
H-Anim names a joint after its pivot (l_hip, l_knee, l_elbow, l_wrist), so the pivot word maps to the
segment the joint turns: hip -> thigh, knee -> shin, elbow -> forearm, wrist -> hand.
"""

from __future__ import annotations

import re
from functools import lru_cache

__all__ = ["tokenize", "side_of_name", "strip_side", "concepts_of", "is_ambiguous", "name_affinity",
           "BODY_WORDS", "CONCEPTS", "FINGER_CONCEPTS"]

_LEFT = {"l", "left", "lf", "lft", "lt"}
_RIGHT = {"r", "right", "rt", "rgt", "ri"}
_LETTERS = {"l", "r"}

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


@lru_cache(maxsize=8192)
def _parts(name: str) -> tuple[tuple[str, ...], ...]:
    """Tokens grouped by separator-delimited part: "Rig01_L_Thigh" -> (("rig", "01"), ("l",), ("thigh",))."""
    out = []
    for part in _SPLIT.split(name):
        if part:
            toks = tuple(t.lower() for t in _CAMEL.findall(part))
            if toks:
                out.append(toks)
    return tuple(out)


@lru_cache(maxsize=8192)
def tokenize(name: str) -> tuple[str, ...]:
    """Lower-case tokens of a joint name: "LeftUpLeg_02" -> ("left", "up", "leg", "02")."""
    return tuple(t for part in _parts(name) for t in part)


def _glued_side(token: str) -> str | None:
    """"lfemur" -> left, "rtibia" -> right, "leftarm" -> left: a side glued to a body word."""
    for word, side in (("left", "left"), ("right", "right")):
        if token.startswith(word) and token[len(word):] in BODY_WORDS | _COMPOUND_WORDS:
            return side
    if len(token) > 2 and token[0] in "lr" and token[1:] in BODY_WORDS | _COMPOUND_WORDS \
            and token not in _NOT_GLUED:
        return "left" if token[0] == "l" else "right"
    return None


# Ordinary words that happen to read as a side letter glued to a body word ("rear" = r + ear).
_NOT_GLUED = frozenset({"rear"})
# Spine words: a letter and digits in front of them name a vertebra ("L5_vertebra"), not a side.
_SPINE_WORDS = frozenset({"spine", "back", "vertebra", "lumbar", "thoracic", "cervical", "sacrum"})


def _glued_prefix(token: str) -> int:
    for word in ("left", "right"):
        if token.startswith(word) and token[len(word):] in BODY_WORDS | _COMPOUND_WORDS:
            return len(word)
    return 1


@lru_cache(maxsize=8192)
def _side_marks(name: str) -> tuple[tuple[int, str, str], ...]:
    """(token position, side, kind) of every side marker; kind is "word", "letter" or "glued"."""
    parts = _parts(name)
    flat = [t for p in parts for t in p]
    marks: list[tuple[int, str, str]] = []
    pos = 0
    last = len(flat) - 1
    for part in parts:
        for k, t in enumerate(part):
            i = pos + k
            side = "left" if t in _LEFT else "right" if t in _RIGHT else None
            if t in ("left", "right"):
                marks.append((i, t, "word"))
            elif side is not None:
                alone = len(part) == 1
                edge = i == 0 or i == last
                # "L1" inside a name is a vertebra, not a side: a letter glued to digits only counts at
                # the name's edges.
                glued_digit = k + 1 < len(part) and part[k + 1].isdigit()
                # At the start, "L1_Thigh" still has a side; "L1" or "L5_vertebra" alone names a vertebra.
                limb_after = any(u in BODY_WORDS and u not in _SPINE_WORDS for u in flat[i + 1:])
                if edge and not (glued_digit and (i != 0 or not limb_after)) or alone:
                    marks.append((i, side, "letter"))
                elif k == 0 and k + 1 < len(part) and not part[k + 1].isdigit() and len(part[k + 1]) > 2 \
                        and (part[k + 1] in BODY_WORDS or part[k + 1] in _COMPOUND_WORDS):
                    # camelCase side letter in front of a body word inside the name: "Rig01_lHand".
                    marks.append((i, side, "letter"))
            else:
                g = _glued_side(t)
                if g and (i == 0 or k == 0):
                    marks.append((i, g, "glued"))
        pos += len(part)
    return tuple(marks)


@lru_cache(maxsize=8192)
def side_of_name(name: str) -> str | None:
    """'left', 'right' or None when the name carries no side marker (or contradictory ones)."""
    found = {s for _, s, _ in _side_marks(name)}
    if len(found) == 1:
        return found.pop()
    return None


@lru_cache(maxsize=8192)
def strip_side(name: str) -> tuple[str, ...]:
    """Tokens of a name without its side marker: "lShldr" -> ("shldr",), "Hand_R" -> ("hand",)."""
    toks = list(tokenize(name))
    if side_of_name(name) is None:
        return tuple(toks)
    marks = {i: kind for i, _, kind in _side_marks(name)}
    out = []
    for i, t in enumerate(toks):
        kind = marks.get(i)
        if kind == "glued":
            out.append(t[_glued_prefix(t):])
        elif kind is None:
            out.append(t)
    return tuple(out)


# ----- anatomical vocabulary ---------------------------------------------------------------------------
# concept -> words. Words are single tokens after joining camel humps pairwise ("Up"+"Leg" -> "upleg",
# "Arm"+"Upper" -> "armupper" is read both ways). Common practice in the trade, with the H-Anim names
# (ISO/IEC 19774 joint list, recalled from memory) added: humanoid_root, sacroiliac, vl1-5, vt1-12,
# vc1-7, skullbase, l_sternoclavicular, l_acromioclavicular, l_shoulder, l_elbow, l_wrist /
# l_radiocarpal, l_hip, l_knee, l_ankle / l_talocrural, l_subtalar, l_midtarsal,
# l_metatarsophalangeal_N, l_thumb1-3, l_index0-3, l_middle0-3, l_ring0-3, l_pinky0-3,
# l_carpometacarpal_N, l_metacarpophalangeal_N, l_carpal_interphalangeal_N, l_eyeball_joint,
# temporomandibular.
CONCEPTS: dict[str, tuple[str, ...]] = {
    "pelvis": ("pelvis", "hips", "sacroiliac", "humanoidroot", "cog", "hipscenter", "hipcenter"),
    "spine": ("spine", "abdomen", "abdomin", "abs", "back", "lowerback", "upperback", "midback", "lumbar",
              "torso", "waist", "belly", "stomach", "vl", "vt", "thoracic", "spinal"),
    "chest": ("chest", "thorax", "upperchest", "ribcage", "ribs", "sternum", "breastbone"),
    "neck": ("neck", "cervical", "vc", "lowerneck", "upperneck", "neckbase"),
    "head": ("head", "skull", "skullbase", "cranium"),
    "clavicle": ("clavicle", "collar", "collarbone", "clav", "sternoclavicular", "acromioclavicular",
                 "scapula"),
    "upperarm": ("upperarm", "uparm", "armupper", "humerus", "bicep", "biceps"),
    "forearm": ("forearm", "lowerarm", "loarm", "armlower", "elbow", "radius", "ulna"),
    "hand": ("hand", "wrist", "palm", "carpus", "carpal", "radiocarpal", "midcarpal"),
    "thigh": ("thigh", "upleg", "upperleg", "legupper", "femur", "thighbone"),
    "shin": ("shin", "calf", "lowerleg", "loleg", "leglower", "knee", "tibia", "fibula", "shank", "crus"),
    "foot": ("foot", "ankle", "talocrural", "tarsus", "talus", "subtalar", "midtarsal", "heel"),
    "toe": ("toe", "toes", "toebase", "ball", "metatarsophalangeal", "phalanges", "forefoot"),
    "thumb": ("thumb", "pollex"),
    "index": ("index", "pointer", "forefinger"),
    "middle": ("middle",),
    "ring": ("ring",),
    "pinky": ("pinky", "pinkie", "little", "small"),
    "finger": ("finger", "fingers", "digit", "digits", "metacarpophalangeal", "interphalangeal",
               "carpometacarpal", "knuckle"),
    "buttock": ("buttock", "buttocks", "glute", "gluteal", "hipjoint"),
    "eye": ("eye", "eyes", "eyeball"),
    "jaw": ("jaw", "mandible", "temporomandibular", "chin"),
    "twist": ("twist", "roll", "tw", "twst"),
    "end": ("end", "nub", "tip", "top", "site", "null"),
    "root": ("root", "world", "ground", "reference", "master", "trajectory"),
}

# Words that name two different parts in common styles; structure decides between them.
_AMBIGUOUS: dict[str, frozenset[str]] = {
    "shoulder": frozenset({"clavicle", "upperarm"}),   # a collar in many rigs, the upper arm in H-Anim
    "shldr": frozenset({"clavicle", "upperarm"}),
    "arm": frozenset({"upperarm"}),                     # "LeftArm" is usually the upper arm
    "leg": frozenset({"shin", "thigh"}),                # "LeftLeg" is a shin in some rigs, a thigh in others
    "hip": frozenset({"thigh", "buttock"}),             # with a side: the hip joint; without: the pelvis
    "mid": frozenset({"middle"}),
    "fore": frozenset({"index"}),
}

_WORD_CONCEPT = {w: c for c, ws in CONCEPTS.items() for w in ws}
_COMPOUND_WORDS = frozenset(w for w in _WORD_CONCEPT if len(w) > 3)

FINGER_CONCEPTS = ("thumb", "index", "middle", "ring", "pinky")
# H-Anim's numbered digits: metacarpophalangeal_1 is the thumb, ... _5 the little finger.
_DIGIT_FINGER = {"1": "thumb", "2": "index", "3": "middle", "4": "ring", "5": "pinky"}
# Pairs of concepts that may stand for each other (a chest is a spine joint, a buttock leads a thigh).
_COMPATIBLE = {frozenset({"spine", "chest"}), frozenset({"finger", "thumb"}), frozenset({"finger", "index"}),
               frozenset({"finger", "middle"}), frozenset({"finger", "ring"}), frozenset({"finger", "pinky"}),
               frozenset({"pelvis", "root"})}


@lru_cache(maxsize=8192)
def _concepts(name: str) -> tuple[frozenset[str], bool]:
    toks = [t for t in strip_side(name) if not t.isdigit()]
    sided = side_of_name(name) is not None
    digits = [t for t in tokenize(name) if t.isdigit()]
    found: set[str] = set()
    ambiguous = False
    used = [False] * len(toks)
    # Compounds first: "up"+"leg", "fore"+"arm", "arm"+"upper" read both ways.
    for i in range(len(toks) - 1):
        for word in (toks[i] + toks[i + 1], toks[i + 1] + toks[i]):
            c = _WORD_CONCEPT.get(word)
            if c and not (used[i] or used[i + 1]):
                found.add(c)
                used[i] = used[i + 1] = True
                break
    for i, t in enumerate(toks):
        if used[i]:
            continue
        if t in _WORD_CONCEPT:
            found.add(_WORD_CONCEPT[t])
        elif t in ("hip",) and not sided:
            found.add("pelvis")
        elif t in _AMBIGUOUS:
            opts = _AMBIGUOUS[t]
            if t == "hip" and "thigh" in found:
                continue
            found |= opts
            ambiguous = ambiguous or len(opts) > 1
    # A part named inside its container ("LeftHandIndex1", "RightFootToe", "HeadEye") is the part.
    for inner, outer in ((set(FINGER_CONCEPTS) | {"finger"}, "hand"), ({"toe"}, "foot"),
                         ({"eye", "jaw"}, "head")):
        if found & inner:
            found.discard(outer)
    # H-Anim digit numbering on generic finger words: l_metacarpophalangeal_2 is the index finger.
    if "finger" in found and digits and not found & set(FINGER_CONCEPTS):
        if any(t in ("metacarpophalangeal", "interphalangeal", "carpometacarpal") for t in toks):
            f = _DIGIT_FINGER.get(digits[-1].lstrip("0"))
            if f:
                found.add(f)
    return frozenset(found), ambiguous


def concepts_of(name: str) -> frozenset[str]:
    """Body concepts a joint name speaks of: "LeftUpLeg" -> {"thigh"}, "Shoulder_L" -> {"clavicle",
    "upperarm"} (ambiguous), "lowerneck" -> {"neck"}, "j07" -> {} (opaque)."""
    return _concepts(name)[0]


def is_ambiguous(name: str) -> bool:
    """True when the name uses a word that means different parts in different styles (shoulder, leg)."""
    return _concepts(name)[1]


def _compatible(a: str, b: str) -> bool:
    return a == b or frozenset({a, b}) in _COMPATIBLE


# Words that carry no meaning of their own in joint names (rig prefixes, "joint", numbering letters).
_NOISE = frozenset("joint jnt bone bn rig def deform base node grp ctrl drv".split())


@lru_cache(maxsize=8192)
def _plain_words(name: str) -> frozenset[str]:
    """Words outside the vocabulary that may still tie two names (props, custom parts)."""
    return frozenset(t for t in strip_side(name) if len(t) > 2 and not t.isdigit() and t not in _NOISE
                     and t not in _WORD_CONCEPT)


@lru_cache(maxsize=65536)
def name_affinity(a: str, b: str) -> float:
    """How much two joint names say they are the same part, in [-1, 1] (0: the names tell nothing).

    Same concept (sides ignored) -> up to 1; concepts that exclude each other -> -1; words shared outside
    the vocabulary (props, custom parts) count by their overlap."""
    ca, cb = concepts_of(a), concepts_of(b)
    # Markers such as "twist" or "end" qualify a part; compare them apart from the part itself.
    qual = {"twist", "end"}
    pa, pb = ca - qual, cb - qual
    score = 0.0
    if pa and pb:
        if pa & pb:
            score = 1.0 if len(pa) == 1 and len(pb) == 1 else 0.6
        elif any(_compatible(x, y) for x in pa for y in pb):
            score = 0.5
        else:
            score = -1.0
    else:
        ta, tb = _plain_words(a), _plain_words(b)
        if ta and tb and not (pa or pb):
            inter = len(ta & tb)
            score = inter / len(ta | tb) if inter else 0.0
    if (ca & qual) != (cb & qual) and score > 0:
        score *= 0.5
    return score
