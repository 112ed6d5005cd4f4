#!/usr/bin/env python3
"""Generate the demo world: the Tallowmere capture stage, its performer's takes, and two character rigs.

Everything here is invented (studio, performer, characters) and built procedurally, seeded, so that

    python demo_clips/generate.py            # from the repository root

rewrites every file under demo_clips/capture/ and demo_clips/rigs/ byte for byte the same.

Sources the numbers come from (see demo_clips/README.md for the full list and what is recalled):

* Body proportions: segment lengths and landmark heights as fractions of standing height H, from
  Drillis R. and Contini R., "Body segment parameters", Report 1166-03, New York University, 1966, as
  tabulated by Winter D.A., "Biomechanics and Motor Control of Human Movement" (Wiley), figure of segment
  lengths. The fractions below are recalled from memory of that figure.
* Walking gait phases: Perry J., "Gait Analysis: Normal and Pathological Function" (SLACK, 1992): stance
  is about 60 percent of a gait cycle and swing about 40 percent, with two double-support periods of
  about 10 percent each (recalled from memory).
* Running: stance falls below half of the cycle and both feet leave the ground (flight); at jogging
  speeds stance is roughly 35-40 percent (Novacheck T.F., "The biomechanics of running", Gait & Posture
  7, 1998; recalled from memory).

Spaces. Every body is built in one working space (+Y up, the figure faces +Z, its left is +X, metres)
and converted into each skeleton's own convention when its files are written:

* capture (Tallowmere stage): Z up, faces -Y (left is +X), centimetres, T-pose zero pose.
* stocky rig: Y up, faces +Z (left is +X), metres, A-pose zero pose (arms 45 degrees down).
* lanky rig: Y up, faces -X (left is +Z), centimetres, T-pose zero pose, with a five-joint tail.

Motion is built in the working space with numpy over all frames at once: a root path and heading, a
footstep plan per foot (stance intervals with a footprint each), analytic two-bone leg IK with the knee
pole forward, hand-keyed spine, head and arm curves, then capture-like noise. Loops run over joints and
footsteps, never over frames.
"""

from __future__ import annotations

import argparse
import sys
import zlib
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

HERE = Path(__file__).resolve().parent
if str(HERE.parent) not in sys.path:  # run as a script from anywhere: import the checkout's library
    sys.path.insert(0, str(HERE.parent))

from retarget import quat  # noqa: E402
from retarget.io import atomic_write, write_bvh  # noqa: E402
from retarget.motion import Motion  # noqa: E402
from retarget.skeleton import Skeleton  # noqa: E402

SEED = 41_731

# =====================================================================================================
# Anthropometric table and the body builder
# =====================================================================================================

#: Drillis & Contini segment lengths and landmark heights as fractions of standing height H, as
#: tabulated by Winter (recalled from memory). Heights are above the floor in an upright stance.
WINTER_FRACTIONS: dict[str, float] = {
    "head_top_height": 1.000,
    "chin_height": 0.870,
    "shoulder_height": 0.818,
    "hip_height": 0.530,       # greater trochanter, used here as the hip joint height
    "knee_height": 0.285,
    "ankle_height": 0.039,
    "shoulder_width": 0.259,   # used as the distance between the two shoulder (upper arm) joints
    "hip_width": 0.191,
    "upper_arm": 0.186,
    "forearm": 0.146,
    "hand": 0.108,             # wrist to the tip of the middle finger
    "thigh": 0.245,            # hip height - knee height
    "shank": 0.246,            # knee height - ankle height
    "foot_length": 0.152,      # heel to the tip of the longest toe
}

# Derived lengths (differences of the table's heights).
HEAD_FRACTION = WINTER_FRACTIONS["head_top_height"] - WINTER_FRACTIONS["chin_height"]       # 0.130
NECK_FRACTION = WINTER_FRACTIONS["chin_height"] - WINTER_FRACTIONS["shoulder_height"]       # 0.052
TRUNK_FRACTION = WINTER_FRACTIONS["shoulder_height"] - WINTER_FRACTIONS["hip_height"]       # 0.288

# Placement rules that the table does not give (common practice, not from a source):
HIP_JOINT_SPACING = 0.55      # hip joint centres are this share of the hip (bitrochanteric) width apart
ANKLE_FROM_HEEL = 0.25        # the ankle joint sits over this share of the foot length from the heel
BALL_FROM_HEEL = 0.73         # the toe (ball) joint sits at this share of the foot length from the heel
BALL_HEIGHT = 0.30            # ball joint height as a share of the ankle height
TOE_TIP_HEIGHT = 0.15         # toe end-site height as a share of the ankle height
PELVIS_ABOVE_HIPS = 0.03      # the root (pelvis) joint sits this share of H above the hip joints


@dataclass(frozen=True)
class BodyPlan:
    """A character's body: the table scaled to ``table_height`` with documented deliberate deviations.

    table_height: metres, the H the table fractions are multiplied by.
    leg, head, arm, width: factors on the leg segments (thigh, shank), the head (chin to top), the arm
        segments (upper arm, forearm, hand) and the widths (shoulder, hip). 1.0 means "as the table".
    """

    name: str
    table_height: float
    leg: float = 1.0
    head: float = 1.0
    arm: float = 1.0
    width: float = 1.0

    def length(self, key: str) -> float:
        """A table segment in metres, with this body's deviation factor applied."""
        f = {"thigh": self.leg, "shank": self.leg, "upper_arm": self.arm, "forearm": self.arm,
             "hand": self.arm, "shoulder_width": self.width, "hip_width": self.width}.get(key, 1.0)
        if key == "head":
            return HEAD_FRACTION * self.table_height * self.head
        if key == "neck":
            return NECK_FRACTION * self.table_height
        if key == "trunk":
            return TRUNK_FRACTION * self.table_height
        return WINTER_FRACTIONS[key] * self.table_height * f

    @property
    def standing_height(self) -> float:
        """Floor to head top, metres."""
        return sum(self.length(k) for k in ("ankle_height", "thigh", "shank", "trunk", "neck", "head"))


def body_for_height(name: str, height: float, **factors: float) -> BodyPlan:
    """The BodyPlan whose standing height is ``height`` metres after the deviation factors."""
    unit = BodyPlan(name, 1.0, **factors).standing_height
    return BodyPlan(name, height / unit, **factors)


#: The three bodies. The performer follows the table exactly; the characters deviate on purpose.
PERFORMER = body_for_height("performer", 1.78)
STOCKY = body_for_height("stocky", 1.35, leg=0.80, head=1.50, width=1.15)   # short legs, big head, broad
LANKY = body_for_height("lanky", 1.95, arm=1.20)                            # long arms


def body_landmarks(body: BodyPlan, arm_down_deg: float = 0.0) -> dict[str, np.ndarray]:
    """Left-side and midline landmarks of a body in the working space (+Y up, +Z forward, +X left), metres.

    arm_down_deg: the rest pose's arm angle below horizontal (0 for a T-pose, 45 for an A-pose); the arm
    segments keep their lengths, only their direction changes.
    Returns a dict of (3,) positions; the right side is the mirror image (x -> -x).
    """
    g = body.length
    H = body.table_height
    ankle_y = g("ankle_height")
    knee_y = ankle_y + g("shank")
    hip_y = knee_y + g("thigh")
    shoulder_y = hip_y + g("trunk")
    chin_y = shoulder_y + g("neck")
    top_y = chin_y + g("head")
    hip_x = 0.5 * HIP_JOINT_SPACING * g("hip_width")
    foot = g("foot_length")
    a = np.deg2rad(arm_down_deg)
    arm_dir = np.array([np.cos(a), -np.sin(a), 0.0])
    shoulder = np.array([0.5 * g("shoulder_width"), shoulder_y, 0.0])
    elbow = shoulder + g("upper_arm") * arm_dir
    wrist = elbow + g("forearm") * arm_dir
    return {
        "pelvis": np.array([0.0, hip_y + PELVIS_ABOVE_HIPS * H, 0.0]),
        "hip": np.array([hip_x, hip_y, 0.0]),
        "knee": np.array([hip_x, knee_y, 0.0]),
        "ankle": np.array([hip_x, ankle_y, 0.0]),
        "ball": np.array([hip_x, BALL_HEIGHT * ankle_y, (BALL_FROM_HEEL - ANKLE_FROM_HEEL) * foot]),
        "toe_tip": np.array([hip_x, TOE_TIP_HEIGHT * ankle_y, (1.0 - ANKLE_FROM_HEEL) * foot]),
        "neck": np.array([0.0, shoulder_y, -0.004 * H]),
        "head": np.array([0.0, chin_y, 0.0]),
        "head_top": np.array([0.0, top_y, 0.0]),
        "shoulder": shoulder,
        "elbow": elbow,
        "wrist": wrist,
        "hand_tip": wrist + g("hand") * arm_dir,
        "arm_dir": arm_dir,
    }


def spine_points(lm: dict[str, np.ndarray], count: int, height: float) -> list[np.ndarray]:
    """``count`` spine joints between the pelvis and the neck base, evenly spaced in height, with a
    gentle S-curve (lumbar forward, thoracic back) of 1 percent of H, as a real rest pose has."""
    lo, hi = lm["pelvis"][1], lm["neck"][1]
    out = []
    for k in range(1, count + 1):
        f = k / (count + 1)
        out.append(np.array([0.0, lo + f * (hi - lo), 0.010 * height * np.sin(2.0 * np.pi * f)]))
    return out


# =====================================================================================================
# Conventions and skeleton builders
# =====================================================================================================

@dataclass(frozen=True)
class FileSpace:
    """How a skeleton's files lay out space: rows of ``basis`` are the file axes' images, i.e.
    file_vector = units_per_metre * basis @ working_vector."""

    up: str
    forward: str
    units: str
    units_per_metre: float
    basis: tuple[tuple[float, ...], ...]

    @property
    def matrix(self) -> np.ndarray:
        return np.array(self.basis, dtype=np.float64)


# working (x left, y up, z forward) -> capture (X = x, Y = -z, Z = y): Z up, faces -Y, left +X.
CAPTURE_SPACE = FileSpace("+Z", "-Y", "cm", 100.0, ((1, 0, 0), (0, 0, -1), (0, 1, 0)))
# working -> stocky: unchanged, Y up, faces +Z, left +X, metres.
STOCKY_SPACE = FileSpace("+Y", "+Z", "m", 1.0, ((1, 0, 0), (0, 1, 0), (0, 0, 1)))
# working -> lanky (X = -z, Y = y, Z = x): Y up, faces -X, left +Z, centimetres.
LANKY_SPACE = FileSpace("+Y", "-X", "cm", 100.0, ((0, 0, -1), (0, 1, 0), (1, 0, 0)))


@dataclass(frozen=True)
class Layout:
    """A skeleton in the working space, before conversion: joints in depth-first order.

    names: (J,); parents: (J,) with -1 for the root; positions: (J, 3) rest positions, metres;
    tips: (J, 3) end-site positions, metres, NaN where the joint has no end site.
    """

    names: tuple[str, ...]
    parents: tuple[int, ...]
    positions: np.ndarray
    tips: np.ndarray

    def index(self, name: str) -> int:
        return self.names.index(name)


class _LayoutBuilder:
    def __init__(self) -> None:
        self.names: list[str] = []
        self.parents: list[int] = []
        self.pos: list[np.ndarray] = []
        self.tips: list[np.ndarray] = []

    def add(self, name: str, parent: str | None, pos, tip=None) -> str:
        self.names.append(name)
        self.parents.append(-1 if parent is None else self.names.index(parent))
        self.pos.append(np.asarray(pos, dtype=np.float64))
        self.tips.append(np.full(3, np.nan) if tip is None else np.asarray(tip, dtype=np.float64))
        return name

    def build(self) -> Layout:
        return Layout(tuple(self.names), tuple(self.parents), np.array(self.pos), np.array(self.tips))


def _mirror(p: np.ndarray) -> np.ndarray:
    return p * np.array([-1.0, 1.0, 1.0])


def _add_trunk(b: "_LayoutBuilder", lm: dict, H: float, count: int, pelvis: str, spine_name, neck: str,
               head: str) -> list[np.ndarray]:
    """Pelvis, ``count`` spine joints (named by spine_name(k), k from 1), neck and head; returns the spine
    joints' positions."""
    b.add(pelvis, None, lm["pelvis"])
    parent = pelvis
    spine = spine_points(lm, count, H)
    for k, p in enumerate(spine, start=1):
        parent = b.add(spine_name(k), parent, p)
    b.add(neck, parent, lm["neck"])
    b.add(head, neck, lm["head"], tip=lm["head_top"])
    return spine


def _add_leg(b: "_LayoutBuilder", lm: dict, m, pelvis: str, names: list[str]) -> None:
    """Thigh, shin, foot and toe joints under the pelvis (names in that order); m mirrors for the right."""
    thigh, shin, foot, toe = names
    b.add(thigh, pelvis, m(lm["hip"]))
    b.add(shin, thigh, m(lm["knee"]))
    b.add(foot, shin, m(lm["ankle"]))
    b.add(toe, foot, m(lm["ball"]), tip=m(lm["toe_tip"]))


def capture_layout() -> Layout:
    """The Tallowmere capture skeleton: 35 joints, 4 spine joints, clavicles, thumb/index/middle with two
    joints each, toes; T-pose. Names: studio prefix ``tm_``, side letter, anatomical bone names."""
    body = PERFORMER
    H = body.table_height
    lm = body_landmarks(body, 0.0)
    b = _LayoutBuilder()
    spine = _add_trunk(b, lm, H, 4, "tm_pelvis", lambda k: f"tm_spine{k}", "tm_neck", "tm_head")
    chest = spine[-1]
    h = body.length("hand")
    for side, sx in (("L", 1.0), ("R", -1.0)):
        m = (lambda p: p) if sx > 0 else _mirror
        d = m(lm["arm_dir"])
        fwd = np.array([0.0, 0.0, 1.0])
        up = np.array([0.0, 1.0, 0.0])
        clav = chest + np.array([sx * 0.012 * H, 0.035 * H, 0.012 * H])
        b.add(f"tm_{side}_clavicle", "tm_spine4", clav)
        b.add(f"tm_{side}_humerus", f"tm_{side}_clavicle", m(lm["shoulder"]))
        b.add(f"tm_{side}_forearm", f"tm_{side}_humerus", m(lm["elbow"]))
        w = m(lm["wrist"])
        b.add(f"tm_{side}_hand", f"tm_{side}_forearm", w)
        tdir = 0.6 * d + 0.8 * fwd
        t1 = w + 0.15 * h * d + 0.16 * h * fwd - 0.06 * h * up
        b.add(f"tm_{side}_thumb1", f"tm_{side}_hand", t1)
        b.add(f"tm_{side}_thumb2", f"tm_{side}_thumb1", t1 + 0.22 * h * tdir, tip=t1 + 0.42 * h * tdir)
        i1 = w + 0.46 * h * d + 0.18 * h * fwd
        b.add(f"tm_{side}_index1", f"tm_{side}_hand", i1)
        b.add(f"tm_{side}_index2", f"tm_{side}_index1", i1 + 0.25 * h * d, tip=i1 + 0.47 * h * d)
        m1 = w + 0.50 * h * d
        b.add(f"tm_{side}_middle1", f"tm_{side}_hand", m1)
        b.add(f"tm_{side}_middle2", f"tm_{side}_middle1", m1 + 0.26 * h * d, tip=w + h * d)
    for side, sx in (("L", 1.0), ("R", -1.0)):
        m = (lambda p: p) if sx > 0 else _mirror
        _add_leg(b, lm, m, "tm_pelvis", [f"tm_{side}_{w}" for w in ("femur", "tibia", "foot", "toe")])
    return b.build()


def stocky_layout() -> Layout:
    """Brannoc, the stocky rig: 26 joints, 3 spine joints, no fingers, forearm and thigh roll (twist)
    joints as extra leaves, A-pose. Names: snake_case named after the joint, ``_l``/``_r`` suffixes."""
    body = STOCKY
    H = body.table_height
    lm = body_landmarks(body, 45.0)
    b = _LayoutBuilder()
    spine = _add_trunk(b, lm, H, 3, "pelvis", lambda k: f"back_{k}", "neck", "head")
    for side, sx in (("l", 1.0), ("r", -1.0)):
        m = (lambda p: p) if sx > 0 else _mirror
        d = m(lm["arm_dir"])
        clav = spine[-1] + np.array([sx * 0.015 * H, 0.04 * H, 0.012 * H])
        b.add(f"collar_{side}", "back_3", clav)
        b.add(f"shoulder_{side}", f"collar_{side}", m(lm["shoulder"]))
        el, wr = m(lm["elbow"]), m(lm["wrist"])
        b.add(f"elbow_{side}", f"shoulder_{side}", el)
        b.add(f"wrist_{side}", f"elbow_{side}", wr, tip=m(lm["hand_tip"]))
        roll = 0.5 * (el + wr)
        b.add(f"forearm_roll_{side}", f"elbow_{side}", roll, tip=roll + 0.1 * body.length("forearm") * d)
    for side, sx in (("l", 1.0), ("r", -1.0)):
        m = (lambda p: p) if sx > 0 else _mirror
        hip, knee = m(lm["hip"]), m(lm["knee"])
        _add_leg(b, lm, m, "pelvis", [f"{w}_{side}" for w in ("hip", "knee", "ankle", "toe")])
        roll = 0.5 * (hip + knee)
        b.add(f"thigh_roll_{side}", f"hip_{side}", roll,
              tip=roll + np.array([0.0, -0.1 * body.length("thigh"), 0.0]))
    return b.build()


def lanky_layout() -> Layout:
    """Quillon, the lanky rig: 31 joints, 5 spine joints, long arms, one mitten finger joint per hand, a
    five-joint tail; T-pose. Names: camelCase with ``lf``/``rt`` side prefixes."""
    body = LANKY
    H = body.table_height
    lm = body_landmarks(body, 0.0)
    b = _LayoutBuilder()
    spine = _add_trunk(b, lm, H, 5, "bodyRoot", lambda k: f"spine{k}", "neck", "head")
    h = body.length("hand")
    for side, sx in (("lf", 1.0), ("rt", -1.0)):
        m = (lambda p: p) if sx > 0 else _mirror
        d = m(lm["arm_dir"])
        blade = spine[-1] + np.array([sx * 0.012 * H, 0.03 * H, -0.01 * H])
        b.add(f"{side}ShoulderBlade", "spine5", blade)
        b.add(f"{side}ArmUpper", f"{side}ShoulderBlade", m(lm["shoulder"]))
        b.add(f"{side}ArmLower", f"{side}ArmUpper", m(lm["elbow"]))
        wr = m(lm["wrist"])
        b.add(f"{side}Hand", f"{side}ArmLower", wr)
        b.add(f"{side}Fingers", f"{side}Hand", wr + 0.5 * h * d, tip=wr + h * d)
    for side, sx in (("lf", 1.0), ("rt", -1.0)):
        m = (lambda p: p) if sx > 0 else _mirror
        _add_leg(b, lm, m, "bodyRoot", [f"{side}{w}" for w in ("LegUpper", "LegLower", "Foot", "Toe")])
    # Tail: out of the back of the pelvis, 5 segments shrinking by 15 percent each, drooping 12 degrees
    # more per segment from a start 15 degrees below horizontal.
    p = lm["pelvis"] + np.array([0.0, -0.02 * H, -0.06 * H])
    parent = "bodyRoot"
    seg = 0.075 * H
    for k in range(1, 6):
        parent = b.add(f"tail{k}", parent, p)
        ang = np.deg2rad(15.0 + 12.0 * (k - 1))
        p = p + seg * np.array([0.0, -np.sin(ang), -np.cos(ang)])
        seg *= 0.85
    b.tips[-1] = p
    return b.build()


CAPTURE_CHANNELS = (("Xposition", "Yposition", "Zposition", "Zrotation", "Yrotation", "Xrotation"),
                    ("Zrotation", "Xrotation", "Yrotation"))
STOCKY_CHANNELS = (("Xposition", "Yposition", "Zposition", "Yrotation", "Xrotation", "Zrotation"),
                   ("Yrotation", "Xrotation", "Zrotation"))
LANKY_CHANNELS = (("Xposition", "Yposition", "Zposition", "Xrotation", "Yrotation", "Zrotation"),
                  ("Xrotation", "Zrotation", "Yrotation"))


def skeleton_from_layout(layout: Layout, space: FileSpace, channels, source: str) -> Skeleton:
    """The layout in the file's own space and units, with identity rest rotations (a BVH zero pose)."""
    c = space.matrix * space.units_per_metre
    parents = np.array(layout.parents)
    pos = layout.positions @ c.T
    offsets = pos.copy()
    offsets[1:] = pos[1:] - pos[parents[1:]]
    tips = (layout.tips - layout.positions) @ c.T  # NaN rows stay NaN
    chans = tuple(channels[0] if p < 0 else channels[1] for p in layout.parents)
    return Skeleton(layout.names, parents, offsets, None, tips, chans, source=source)


def capture_skeleton() -> Skeleton:
    return skeleton_from_layout(capture_layout(), CAPTURE_SPACE, CAPTURE_CHANNELS, "tallowmere capture")


def stocky_skeleton() -> Skeleton:
    return skeleton_from_layout(stocky_layout(), STOCKY_SPACE, STOCKY_CHANNELS, "brannoc")


def lanky_skeleton() -> Skeleton:
    return skeleton_from_layout(lanky_layout(), LANKY_SPACE, LANKY_CHANNELS, "quillon")


#: Rig files: name -> (builder, file space, body plan, arm angle of the rest pose in degrees).
RIGS = {
    "brannoc_stocky": (stocky_skeleton, STOCKY_SPACE, STOCKY, 45.0),
    "quillon_lanky": (lanky_skeleton, LANKY_SPACE, LANKY, 0.0),
}


# =====================================================================================================
# Small motion helpers
# =====================================================================================================

def smoothstep(u: np.ndarray) -> np.ndarray:
    """3u^2 - 2u^3 on [0, 1], clamped outside: zero slope at both ends."""
    u = np.clip(u, 0.0, 1.0)
    return u * u * (3.0 - 2.0 * u)


def keyed(t: np.ndarray, keys: list[tuple[float, float]]) -> np.ndarray:
    """A smooth curve through (time, value) keys, monotone between keys (PCHIP), held outside them."""
    from scipy.interpolate import PchipInterpolator

    kt = np.array([k[0] for k in keys], dtype=np.float64)
    kv = np.array([k[1] for k in keys], dtype=np.float64)
    return PchipInterpolator(kt, kv, extrapolate=False)(np.clip(t, kt[0], kt[-1]))


def hermite(t: np.ndarray, keys: list[tuple[float, float, float]]) -> np.ndarray:
    """A cubic Hermite curve through (time, value, slope) keys, held outside them."""
    from scipy.interpolate import CubicHermiteSpline

    kt, kv, ks = (np.array(c, dtype=np.float64) for c in zip(*keys))
    return CubicHermiteSpline(kt, kv, ks, extrapolate=False)(np.clip(t, kt[0], kt[-1]))


def axis_rot(axis: str, angle: np.ndarray) -> np.ndarray:
    """Rotations about a working-space axis "X", "Y" or "Z" by angles in radians: (...) -> (..., 4)."""
    v = np.zeros(3)
    v["XYZ".index(axis)] = 1.0
    return quat.from_axis_angle(v, np.asarray(angle, dtype=np.float64))


def chain(*qs: np.ndarray) -> np.ndarray:
    """Product of rotations, left to right (the rightmost applies first)."""
    out = qs[0]
    for q in qs[1:]:
        out = quat.multiply(out, q)
    return out


def yaw_vector(yaw: np.ndarray) -> np.ndarray:
    """(F,) headings (radians, about +Y, 0 = facing +Z) -> (F, 3) horizontal unit vectors."""
    return np.stack([np.sin(yaw), np.zeros_like(yaw), np.cos(yaw)], axis=-1)


def smooth_noise(rng: np.random.Generator, frames: int, dims: int, sigma_frames: float) -> np.ndarray:
    """(frames, dims) Gaussian noise low-passed by a Gaussian of ``sigma_frames``, unit std per column."""
    from scipy.ndimage import gaussian_filter1d

    raw = rng.standard_normal((frames, dims))
    out = gaussian_filter1d(raw, sigma_frames, axis=0, mode="reflect")
    return out / np.maximum(out.std(axis=0, keepdims=True), 1e-12)


# =====================================================================================================
# Footstep plans
# =====================================================================================================

@dataclass
class Stance:
    """One foot contact. t0, t1: seconds. place: (3,) the ankle's ground point (x, support height, z),
    working space; yaw: foot heading, radians. heel_off: (angle in radians, share of the stance at its
    end) for a heel rise pivoting about the toe joint. slide: (3,) slight drift of the planted foot over
    the stance (what a real capture shows). lift: swing height after this stance, metres."""

    t0: float
    t1: float
    place: np.ndarray
    yaw: float
    heel_off: tuple[float, float] = (0.0, 0.0)
    slide: np.ndarray = field(default_factory=lambda: np.zeros(3))
    lift: float = 0.08


@dataclass
class FeetMotion:
    """Per-frame feet in the working space, for one foot.

    ball: (F, 3) toe joint position; yaw, pitch: (F,) foot heading and heel rise (radians, positive lifts
    the heel); toe_bend: (F,) toe joint rotation about the foot's lateral axis; contact: (F,) bool;
    support: (F,) support height under the foot while in contact (NaN in the air).
    """

    ball: np.ndarray
    yaw: np.ndarray
    pitch: np.ndarray
    toe_bend: np.ndarray
    contact: np.ndarray
    support: np.ndarray


def feet_from_plan(t: np.ndarray, stances: list[Stance], ball_offset: np.ndarray) -> FeetMotion:
    """Sample one foot's plan on the frame times t (F,).

    ball_offset: (3,) rest vector from the ankle's ground point to the toe joint, in the foot's frame.
    During a stance the toe joint stays where the plan puts it (apart from the planned slide), the foot
    flat until the heel rises at the end. During a swing the foot travels with smoothstep timing and lifts
    on a sin^2 arc, stepping up early and stepping down late when the support heights differ.
    """
    f = len(t)
    ball = np.zeros((f, 3))
    yaw = np.zeros(f)
    pitch = np.zeros(f)
    toe = np.zeros(f)
    contact = np.zeros(f, dtype=bool)
    support = np.full(f, np.nan)

    def ball_at(st: Stance, progress) -> np.ndarray:
        rot = axis_rot("Y", np.full(np.shape(progress), st.yaw))
        return st.place + quat.rotate(rot, ball_offset) + np.multiply.outer(progress, st.slide)

    # Unwrapped headings, so a swing never turns the long way round.
    stances = [Stance(s.t0, s.t1, s.place, float(y), s.heel_off, s.slide, s.lift)
               for s, y in zip(stances, np.unwrap([s.yaw for s in stances]))]
    for k, st in enumerate(stances):
        last = k == len(stances) - 1
        m = (t >= st.t0) & ((t <= st.t1) if last else (t < st.t1))
        if k == 0:
            m |= t < st.t0
        if last:
            m |= t > st.t1
        prog = np.clip((t[m] - st.t0) / max(st.t1 - st.t0, 1e-9), 0.0, 1.0)
        ball[m] = ball_at(st, prog)
        yaw[m] = st.yaw
        contact[m] = True
        support[m] = st.place[1]
        ang, share = st.heel_off
        if ang > 0 and share > 0 and not last:
            rise = ang * smoothstep((prog - (1.0 - share)) / share)
            pitch[m] = rise
            toe[m] = -rise  # the toes stay flat on the ground while the heel rises
        if last:
            continue
        nx = stances[k + 1]
        sw = (t >= st.t1) & (t < nx.t0)
        u = (t[sw] - st.t1) / (nx.t0 - st.t1)
        a = ball_at(st, np.ones(1))[0]
        b = ball_at(nx, np.zeros(1))[0]
        s = smoothstep(u)
        pos = a + np.outer(s, b - a)
        dh = b[1] - a[1]
        if dh > 0.02:     # stepping up: rise early
            base = a[1] + dh * smoothstep(u / 0.55)
        elif dh < -0.02:  # stepping down: drop late
            base = a[1] + dh * smoothstep((u - 0.45) / 0.55)
        else:
            base = a[1] + dh * s
        pos[:, 1] = base + st.lift * np.sin(np.pi * u) ** 2
        ball[sw] = pos
        yaw[sw] = st.yaw + (nx.yaw - st.yaw) * s
        start = st.heel_off[0] if st.heel_off[1] > 0 else 0.0
        pitch[sw] = start * (1.0 - s)
        toe[sw] = -start * (1.0 - smoothstep(2.0 * u))
    return FeetMotion(ball, yaw, pitch, toe, contact, support)


def cyclic_stances(cycle: float, stance_share: float, phase_offset: float, duration: float,
                   path, lateral: float, toe_out: float, heel_off: tuple[float, float], lift: float,
                   rng: np.random.Generator, slide_cm: tuple[float, float],
                   over_share: float = 0.5) -> list[Stance]:
    """Stances of one foot in a steady gait.

    The foot is in stance while frac(t / cycle + phase_offset) < stance_share; each footprint sits
    under the body path at the moment ``over_share`` of the way through its stance (the body passes over
    the foot), ``lateral`` metres to the side (signed, + is left), toed out by ``toe_out`` radians.
    path(t) -> ((T, 3) ground point, (T,) heading) accepts any times. One stance beyond each end of the
    take is kept so the first and last swings are whole.
    """
    out = []
    n0 = int(np.floor(phase_offset)) - 2
    n1 = int(np.ceil(duration / cycle + phase_offset)) + 1
    for n in range(n0, n1):
        t0 = (n - phase_offset) * cycle
        t1 = t0 + stance_share * cycle
        if t1 < -cycle or t0 > duration + cycle:
            continue
        tm = t0 + over_share * (t1 - t0)
        p, hd = path(np.array([tm]))
        side = quat.rotate(axis_rot("Y", hd), np.array([lateral, 0.0, 0.0]))[0]
        out.append(Stance(t0, t1, p[0] + side, float(hd[0] + np.sign(lateral) * toe_out), heel_off,
                          _slide(rng, *slide_cm), lift))
    return out


def _slide(rng: np.random.Generator, lo_cm: float, hi_cm: float) -> np.ndarray:
    """A random horizontal drift vector of lo..hi centimetres (the slight slide of a planted foot)."""
    a = rng.uniform(0.0, 2.0 * np.pi)
    r = rng.uniform(lo_cm, hi_cm) / 100.0
    return np.array([r * np.cos(a), 0.0, r * np.sin(a)])


# =====================================================================================================
# IK
# =====================================================================================================

def two_bone_ik(root: np.ndarray, target: np.ndarray, l1: float, l2: float, pole: np.ndarray,
                reach: float = 0.9999) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Analytic two-bone IK (hip-knee-ankle) for all frames.

    root, target, pole: (F, 3); the middle joint bends towards ``pole``. The distance is clamped to
    [|l1 - l2|, reach * (l1 + l2)]. Returns (middle joint (F, 3), end joint reached (F, 3), hinge axis
    (F, 3) = unit(pole_perp x root_to_target)).
    """
    d = target - root
    dist = np.linalg.norm(d, axis=-1, keepdims=True)
    u = d / np.maximum(dist, 1e-9)
    dist_c = np.clip(dist, abs(l1 - l2) + 1e-6, reach * (l1 + l2))
    v = pole - np.sum(pole * u, axis=-1, keepdims=True) * u
    v = v / np.linalg.norm(v, axis=-1, keepdims=True)
    cos_a = np.clip((l1 * l1 + dist_c ** 2 - l2 * l2) / (2.0 * l1 * dist_c), -1.0, 1.0)
    sin_a = np.sqrt(1.0 - cos_a ** 2)
    mid = root + l1 * (cos_a * u + sin_a * v)
    end = root + dist_c * u
    hinge = np.cross(v, u)
    return mid, end, hinge


def aim_rotation(rest_dir: np.ndarray, rest_side: np.ndarray, direction: np.ndarray,
                 side: np.ndarray) -> np.ndarray:
    """Global rotations taking the rest frame (dir, side) onto (direction, side) per frame: (F, 4).

    rest_dir, rest_side: (3,) orthogonal unit vectors; direction, side: (F, 3), side orthogonal to
    direction (re-orthogonalised here)."""
    def frame(d, s):
        d = d / np.linalg.norm(d, axis=-1, keepdims=True)
        s = s - np.sum(s * d, axis=-1, keepdims=True) * d
        s = s / np.linalg.norm(s, axis=-1, keepdims=True)
        return np.stack([d, s, np.cross(d, s)], axis=-1)  # columns

    b_rest = frame(rest_dir[None], rest_side[None])[0]
    b_now = frame(direction, side)
    return quat.from_matrix(b_now @ b_rest.T)


# =====================================================================================================
# Pose assembly on the capture skeleton
# =====================================================================================================

@dataclass
class TakePlan:
    """What a take builder decides, all in the working space, per frame (F,) unless stated.

    pelvis_pos: (F, 3); heading: facing direction; pelvis_yaw/tilt/roll: pelvis rotation on top of the
    heading; spine_flex/bend/twist: totals spread over the spine; neck_flex; look_yaw (world), look_pitch;
    arm curves per side "L"/"R": hang (down from the T-pose), swing (forward), elbow, wrist, curl.
    feet: per side, FeetMotion. knee_out: radians the knee pole turns outwards.
    """

    name: str
    fps: float
    t: np.ndarray
    pelvis_pos: np.ndarray
    heading: np.ndarray
    feet: dict[str, FeetMotion]
    curves: dict[str, np.ndarray] = field(default_factory=dict)
    knee_out: float = np.deg2rad(6.0)

    def c(self, key: str, default: float = 0.0) -> np.ndarray:
        v = self.curves.get(key)
        return np.full(len(self.t), default) if v is None else np.broadcast_to(v, self.t.shape)


def _global_rotations(layout: Layout, local: np.ndarray, upto: int) -> np.ndarray:
    """(F, upto, 4) global rotations of the first ``upto`` joints from local ones (F, J, 4)."""
    g = np.empty(local.shape[:1] + (upto, 4))
    for j in range(upto):
        p = layout.parents[j]
        g[:, j] = local[:, j] if p < 0 else quat.multiply(g[:, p], local[:, j])
    return g


def assemble(plan: TakePlan, rng: np.random.Generator) -> tuple[np.ndarray, np.ndarray, dict]:
    """Local rotations (F, J, 4) and root positions (F, 3) of the capture skeleton in the working space,
    plus diagnostics (pelvis drop for reach, IK residual)."""
    lay = capture_layout()
    J = len(lay.names)
    F = len(plan.t)
    ix = lay.index
    pos = lay.positions
    local = np.broadcast_to(quat.identity(), (F, J, 4)).copy()
    c = plan.c

    # Pelvis: heading, then yaw oscillation, forward tilt, side roll.
    pelvis_rot = chain(axis_rot("Y", plan.heading + c("pelvis_yaw")), axis_rot("X", c("pelvis_tilt")),
                       axis_rot("Z", c("pelvis_roll")))
    root = plan.pelvis_pos.copy()

    # Spine, neck.
    spine = [ix(f"tm_spine{k}") for k in range(1, 5)]
    for j in spine:
        local[:, j] = chain(axis_rot("Y", c("spine_twist") / 4), axis_rot("X", c("spine_flex") / 4),
                            axis_rot("Z", c("spine_bend") / 4))
    local[:, ix("tm_neck")] = axis_rot("X", c("neck_flex"))
    local[:, 0] = pelvis_rot
    # Head: keep a world-space gaze (look_yaw about +Y, then look_pitch down), whatever the spine does.
    g = _global_rotations(lay, local, ix("tm_head"))
    want = chain(axis_rot("Y", c("look_yaw")), axis_rot("X", c("look_pitch")), axis_rot("Z", c("head_roll")))
    local[:, ix("tm_head")] = quat.multiply(quat.conjugate(g[:, ix("tm_neck")]), want)

    # Arms and fingers, per side: s = +1 left, -1 right (mirror flips rotations about Y and Z).
    for side, s in (("L", 1.0), ("R", -1.0)):
        local[:, ix(f"tm_{side}_clavicle")] = chain(axis_rot("Z", s * c(f"{side}_shrug")),
                                                    axis_rot("Y", -s * c(f"{side}_reach")))
        local[:, ix(f"tm_{side}_humerus")] = chain(axis_rot("X", -c(f"{side}_swing")),
                                                   axis_rot("Z", -s * c(f"{side}_hang", np.deg2rad(84))),
                                                   axis_rot("X", c(f"{side}_twist")))
        local[:, ix(f"tm_{side}_forearm")] = axis_rot("Y", -s * c(f"{side}_elbow", np.deg2rad(12)))
        local[:, ix(f"tm_{side}_hand")] = chain(axis_rot("Z", -s * c(f"{side}_wrist")),
                                                axis_rot("Y", -s * c(f"{side}_wrist_side")))
        curl = c(f"{side}_curl", np.deg2rad(18))
        for fname in ("index", "middle"):
            for k in (1, 2):
                local[:, ix(f"tm_{side}_{fname}{k}")] = axis_rot("Z", -s * curl * (1.0 + 0.3 * (k - 1)))
        local[:, ix(f"tm_{side}_thumb1")] = axis_rot("X", 0.5 * curl)
        local[:, ix(f"tm_{side}_thumb2")] = axis_rot("X", 0.7 * curl)

    # Legs: ankle targets from the feet, hips from the pelvis; lower the pelvis where a leg cannot reach.
    l_thigh = np.linalg.norm(pos[ix("tm_L_tibia")] - pos[ix("tm_L_femur")])
    l_shank = np.linalg.norm(pos[ix("tm_L_foot")] - pos[ix("tm_L_tibia")])
    reach = 0.985 * (l_thigh + l_shank)  # a standing knee keeps a little bend (common practice)
    ankles, hips_rel, foot_rot = {}, {}, {}
    drop = np.zeros(F)
    for side in ("L", "R"):
        ft = plan.feet[side]
        toe_vec = pos[ix(f"tm_{side}_toe")] - pos[ix(f"tm_{side}_foot")]
        foot_rot[side] = chain(axis_rot("Y", ft.yaw), axis_rot("X", ft.pitch))
        ankles[side] = ft.ball - quat.rotate(foot_rot[side], toe_vec)
        hips_rel[side] = quat.rotate(pelvis_rot, pos[ix(f"tm_{side}_femur")] - pos[0])
        d = root + hips_rel[side] - ankles[side]
        horiz2 = d[:, 0] ** 2 + d[:, 2] ** 2
        need = d[:, 1] - np.sqrt(np.maximum(reach ** 2 - horiz2, 0.0))
        drop = np.maximum(drop, need)
    if np.any(drop > 0):
        from scipy.ndimage import gaussian_filter1d, maximum_filter1d

        w = max(3, int(round(0.12 * plan.fps)) | 1)
        drop = gaussian_filter1d(maximum_filter1d(np.maximum(drop, 0.0), size=w), w / 6.0)
        root[:, 1] -= drop

    residual = 0.0
    for side in ("L", "R"):
        ft = plan.feet[side]
        hip = root + hips_rel[side]
        out = 1.0 if side == "L" else -1.0
        pole = yaw_vector(np.arctan2(np.sin(ft.yaw) + np.sin(plan.heading), np.cos(ft.yaw) +
                                     np.cos(plan.heading)) + out * plan.knee_out)
        knee, ankle, hinge = two_bone_ik(hip, ankles[side], l_thigh, l_shank, pole)
        residual = max(residual, float(np.max(np.linalg.norm(ankle - ankles[side], axis=-1))))
        down, lateral = np.array([0.0, -1.0, 0.0]), np.array([1.0, 0.0, 0.0])
        g_thigh = aim_rotation(down, lateral, knee - hip, hinge)
        g_shin = aim_rotation(down, lateral, ankle - knee, hinge)
        g_foot = foot_rot[side]
        jf, jt, ja, jo = (ix(f"tm_{side}_{n}") for n in ("femur", "tibia", "foot", "toe"))
        local[:, jf] = quat.multiply(quat.conjugate(pelvis_rot), g_thigh)
        local[:, jt] = quat.multiply(quat.conjugate(g_thigh), g_shin)
        local[:, ja] = quat.multiply(quat.conjugate(g_shin), g_foot)
        local[:, jo] = axis_rot("X", ft.toe_bend)

    # Root position: the plan gives the pelvis joint; the skeleton root is the pelvis joint.
    local = quat.normalize(local)
    return local, root, {"max_pelvis_drop_m": float(drop.max()), "ik_residual_m": residual}


# =====================================================================================================
# Noise: what a real capture adds
# =====================================================================================================

#: Jitter amplitudes (1 standard deviation), chosen to look like a clean optical solve (recalled
#: impression, not measured): millimetres on the root, tenths of a degree on joints, less on the legs so
#: planted feet stay within a few millimetres.
JITTER_ROOT_M = 0.0008
JITTER_LEG_DEG = 0.05
JITTER_UPPER_DEG = 0.25


def add_capture_noise(local: np.ndarray, root: np.ndarray, fps: float,
                      rng: np.random.Generator) -> tuple[np.ndarray, np.ndarray]:
    """Low-passed positional and rotational jitter (smoothed over ~50 ms, as a solver's filter does)."""
    lay = capture_layout()
    F, J = local.shape[:2]
    sigma = 0.05 * fps
    legs = np.array([("femur" in n or "tibia" in n or "foot" in n or "toe" in n or n == "tm_pelvis")
                     for n in lay.names])
    amp = np.deg2rad(np.where(legs, JITTER_LEG_DEG, JITTER_UPPER_DEG))
    vec = smooth_noise(rng, F, J * 3, sigma).reshape(F, J, 3) * amp[None, :, None]
    ang = np.linalg.norm(vec, axis=-1)
    axis = vec / np.maximum(ang, 1e-12)[..., None]
    noisy = quat.multiply(local, quat.from_axis_angle(axis, ang))
    root = root + JITTER_ROOT_M * smooth_noise(rng, F, 3, sigma)
    return quat.normalize(noisy), root


# =====================================================================================================
# Take builders
# =====================================================================================================



def _ball_offset() -> np.ndarray:
    lm = body_landmarks(PERFORMER)
    return lm["ball"] - lm["ankle"] * np.array([1.0, 0.0, 1.0])


def _hip_x() -> float:
    return float(body_landmarks(PERFORMER)["hip"][0])


def _stand_pelvis_y(bend: float = 0.012) -> float:
    """Pelvis height standing with slightly soft knees (bend: share of H lower than the rest pose)."""
    return float(body_landmarks(PERFORMER)["pelvis"][1] - bend * PERFORMER.table_height)


WALK_STANCE = 0.60   # Perry: stance share of a walking gait cycle
JOG_STANCE = 0.38    # below one half, with flight phases (running literature, recalled)


def _gait(name: str, fps: float, cycles: int, cycle: float, stance: float, path, *, run: bool,
          rng: np.random.Generator, lean_deg: float = 0.0) -> TakePlan:
    """A steady gait along a path: walk (run=False) or jog (run=True)."""
    duration = cycles * cycle
    t = np.arange(int(round(duration * fps))) / fps
    lat = _hip_x() * (0.95 if not run else 0.6)
    # Heel rise at the end of stance and where in the stance the body passes over the foot: tuned so
    # the legs reach with a pelvis bob of about 5 cm, as walking shows (common practice).
    heel = (np.deg2rad(35.0), 0.30) if not run else (np.deg2rad(45.0), 0.50)
    over = 0.40 if not run else 0.35
    lift = 0.075 if not run else 0.16
    feet = {}
    for side, off, sgn in (("L", 0.0, 1.0), ("R", 0.5, -1.0)):
        st = cyclic_stances(cycle, stance, off, duration, path, sgn * lat, np.deg2rad(6.0), heel, lift,
                            rng, (0.3, 1.0), over_share=over)
        feet[side] = feet_from_plan(t, st, _ball_offset())
    p, hd = path(t)
    ph = t / cycle                          # left-foot phase, 0 = left foot strike
    mid = 2 * np.pi * (ph - stance / 2)     # 0 at left mid-stance
    pel = p.copy()
    if not run:
        pel[:, 1] = _stand_pelvis_y(0.022) + 0.012 * np.cos(2 * mid)   # highest at mid-stance
        sway = 0.018 * np.cos(mid)
    else:
        pel[:, 1] = _stand_pelvis_y(0.045) - 0.03 * np.cos(2 * mid)    # lowest at mid-stance
        sway = 0.008 * np.cos(mid)
    pel += quat.rotate(axis_rot("Y", hd), np.array([1.0, 0.0, 0.0])) * sway[:, None]
    A = 1.0 if not run else 1.8
    arm = np.deg2rad(18.0 if not run else 32.0)
    cosL = np.cos(2 * np.pi * ph)
    curves = {
        "pelvis_yaw": -np.deg2rad(4.5) * A * cosL,
        "pelvis_tilt": np.full(len(t), np.deg2rad(5.0 if not run else 9.0)),
        "pelvis_roll": np.deg2rad(3.5) * np.cos(mid) + np.deg2rad(lean_deg),
        "spine_twist": np.deg2rad(6.0) * A * cosL,
        "spine_flex": np.full(len(t), np.deg2rad(2.0 if not run else 6.0)),
        "spine_bend": -np.deg2rad(2.0) * np.cos(mid) - np.deg2rad(lean_deg) * 0.5,
        "neck_flex": np.full(len(t), np.deg2rad(-4.0 if not run else -10.0)),
        "look_yaw": hd,
        "look_pitch": np.full(len(t), np.deg2rad(6.0)),
        "L_swing": np.deg2rad(4.0) - arm * cosL,
        "R_swing": np.deg2rad(4.0) + arm * cosL,
        "L_elbow": np.deg2rad(15.0 if not run else 80.0) + np.deg2rad(8.0 if not run else 15.0) * (-cosL),
        "R_elbow": np.deg2rad(15.0 if not run else 80.0) + np.deg2rad(8.0 if not run else 15.0) * cosL,
        "L_hang": np.full(len(t), np.deg2rad(84.0 if not run else 76.0)),
        "R_hang": np.full(len(t), np.deg2rad(84.0 if not run else 76.0)),
    }
    if run:
        curves["L_curl"] = curves["R_curl"] = np.full(len(t), np.deg2rad(50.0))
    return TakePlan(name, fps, t, pel, hd, feet, curves)


def _straight_path(speed: float):
    """A root path along +Z at constant speed, heading unchanged: t (F,) -> (positions (F, 3), yaw (F,))."""

    def path(t):
        p = np.zeros((len(t), 3))
        p[:, 2] = speed * t
        return p, np.zeros(len(t))

    return path


def take_walk(rng: np.random.Generator) -> TakePlan:
    """Straight walk along the performer's forward axis, 1.25 m/s, 1.08 s cycle (111 steps a minute,
    stride 1.35 m), 4 cycles at 120 fps."""
    return _gait("walk", 120.0, 4, 1.08, WALK_STANCE, _straight_path(1.25), run=False, rng=rng)


def take_walk_curve(rng: np.random.Generator) -> TakePlan:
    """Walk on a left-hand arc of 3 m radius at 1.2 m/s, 1.12 s cycle, 4 cycles at 100 fps."""
    speed, cycle, radius = 1.2, 1.12, 3.0

    def path(t):
        s = speed * t
        p = np.stack([radius - radius * np.cos(s / radius), np.zeros_like(s), radius * np.sin(s / radius)],
                     axis=-1)
        return p, s / radius

    lean = np.rad2deg(np.arctan(speed ** 2 / radius / 9.81))  # lean into the turn
    return _gait("walk_curve", 100.0, 4, cycle, WALK_STANCE, path, run=False, rng=rng, lean_deg=-lean)


def take_jog(rng: np.random.Generator) -> TakePlan:
    """Jog at 2.8 m/s, 0.72 s cycle (stride 2.0 m), stance 38 percent (flight phases), 4 cycles at
    120 fps."""
    return _gait("jog", 120.0, 4, 0.72, JOG_STANCE, _straight_path(2.8), run=True, rng=rng)


def _standing_curves(t: np.ndarray, heading) -> dict[str, np.ndarray]:
    n = len(t)
    return {"pelvis_tilt": np.full(n, np.deg2rad(4.0)), "neck_flex": np.full(n, np.deg2rad(-3.0)),
            "look_yaw": np.broadcast_to(heading, (n,)).copy(), "look_pitch": np.full(n, np.deg2rad(5.0))}


def take_turn(rng: np.random.Generator) -> TakePlan:
    """Turn in place by 180 degrees to the left with four steps per foot, 3.2 s at 60 fps."""
    fps, duration = 60.0, 3.2
    t = np.arange(int(round(duration * fps))) / fps

    def heading(x):
        return np.pi * smoothstep((np.asarray(x) - 0.45) / 2.3)

    hx = _hip_x()
    swings = {"L": [(0.55, 0.85), (1.15, 1.45), (1.75, 2.05), (2.35, 2.65)],
              "R": [(0.85, 1.15), (1.45, 1.75), (2.05, 2.35), (2.65, 2.95)]}
    feet = {}
    for side, sgn in (("L", 1.0), ("R", -1.0)):
        edges = [0.0] + [x for sw in swings[side] for x in sw] + [duration]
        stances = []
        for a, b in zip(edges[0::2], edges[1::2]):
            hd = float(heading(0.5 * (a + b)))
            place = quat.rotate(axis_rot("Y", hd), np.array([sgn * hx * 1.05, 0.0, 0.0]))
            stances.append(Stance(a, b, place, hd + sgn * np.deg2rad(5.0), (np.deg2rad(10.0), 0.2),
                                  _slide(rng, 0.2, 0.7), 0.055))
        feet[side] = feet_from_plan(t, stances, _ball_offset())
    hd = heading(t)
    pel = np.zeros((len(t), 3))
    pel[:, 1] = _stand_pelvis_y(0.02)
    # Weight onto the stance foot: sway towards the foot that is not swinging.
    sway = np.zeros(len(t))
    for side, sgn in (("L", 1.0), ("R", -1.0)):
        for a, b in swings[side]:
            sway -= sgn * 0.02 * np.sin(np.pi * np.clip((t - a + 0.1) / (b - a + 0.2), 0, 1)) ** 2
    pel += quat.rotate(axis_rot("Y", hd), np.array([1.0, 0.0, 0.0])) * sway[:, None]
    curves = _standing_curves(t, hd)
    curves["look_yaw"] = np.pi * smoothstep((t - 0.3) / 2.1)  # the head leads the turn
    curves["spine_twist"] = curves["look_yaw"] - hd
    curves["pelvis_roll"] = np.deg2rad(3.0) * sway / 0.02
    curves["L_swing"] = curves["R_swing"] = np.full(len(t), np.deg2rad(6.0))
    return TakePlan("turn", fps, t, pel, hd, feet, curves)


def take_jump(rng: np.random.Generator) -> TakePlan:
    """Forward jump from both feet: countermovement, take-off, 0.47 s flight, landing, recovery; arms
    swing back then overhead. 3.0 s at 120 fps."""
    fps, duration = 120.0, 3.0
    t = np.arange(int(round(duration * fps))) / fps
    g = 9.81
    v0, vz = 2.3, 1.0                  # take-off vertical and forward speed, m/s
    t_off = 1.32
    flight = 2.0 * v0 / g
    t_land = t_off + flight
    ys = _stand_pelvis_y(0.012)
    y_off = ys + 0.05
    z_off = 0.08
    z_land = z_off + vz * flight
    y = hermite(t, [(0.0, ys, 0.0), (0.5, ys, 0.0), (1.05, ys - 0.25, 0.0), (t_off, y_off, v0)])
    y2 = hermite(t, [(t_land, y_off, -v0), (t_land + 0.36, ys - 0.22, 0.0), (t_land + 1.0, ys, 0.0),
                     (duration, ys, 0.0)])
    z = hermite(t, [(0.0, 0.0, 0.0), (0.5, 0.0, 0.0), (1.05, -0.04, 0.0), (t_off, z_off, vz)])
    z2 = hermite(t, [(t_land, z_land, vz), (t_land + 0.36, z_land + 0.10, 0.0), (duration, z_land + 0.10, 0.0)])
    air = (t >= t_off) & (t < t_land)
    tau = t - t_off
    y = np.where(air, y_off + v0 * tau - 0.5 * g * tau ** 2, np.where(t >= t_land, y2, y))
    z = np.where(air, z_off + vz * tau, np.where(t >= t_land, z2, z))
    pel = np.stack([np.zeros_like(t), y, z], axis=-1)
    hx = _hip_x()
    feet = {}
    for side, sgn in (("L", 1.0), ("R", -1.0)):
        st = [Stance(0.0, t_off, np.array([sgn * hx * 1.1, 0.0, 0.0]), sgn * np.deg2rad(8.0),
                     (np.deg2rad(38.0), 0.18), _slide(rng, 0.2, 0.6), 0.0),
              Stance(t_land, duration, np.array([sgn * hx * 1.2, 0.0, z_land + 0.10]), sgn * np.deg2rad(10.0),
                     (0.0, 0.0), _slide(rng, 0.3, 0.9), 0.0)]
        ft = feet_from_plan(t, st, _ball_offset())
        # In the air the feet hang from the body: they follow the pelvis, tucking up a little.
        u = np.clip((t - t_off) / flight, 0.0, 1.0)
        rest_ball = _ball_offset()[1]
        ft.ball[air, 1] = rest_ball + (y[air] - y_off) + 0.10 * np.sin(np.pi * u[air]) ** 2
        feet[side] = ft
    hd = np.zeros(len(t))
    curves = _standing_curves(t, hd)
    crouch = np.clip((ys - y) / 0.25, 0.0, None)
    curves["spine_flex"] = np.deg2rad(28.0) * crouch
    curves["pelvis_tilt"] = np.deg2rad(4.0) + np.deg2rad(22.0) * crouch
    curves["neck_flex"] = -np.deg2rad(20.0) * crouch
    curves["look_pitch"] = np.deg2rad(12.0) * (1.0 - crouch) + np.deg2rad(25.0) * crouch
    swing = keyed(t, [(0.0, 5.0), (0.5, 5.0), (1.05, -45.0), (t_off, 150.0), (t_off + 0.2, 170.0),
                      (t_land, 80.0), (t_land + 0.36, 35.0), (t_land + 1.0, 5.0), (duration, 5.0)])
    for side in ("L", "R"):
        curves[f"{side}_swing"] = np.deg2rad(swing)
        curves[f"{side}_elbow"] = np.deg2rad(keyed(t, [(0.0, 12.0), (1.05, 10.0), (t_off, 25.0),
                                                       (t_land + 0.36, 40.0), (duration, 12.0)]))
    return TakePlan("jump", fps, t, pel, hd, feet, curves)


def take_crouch_pick(rng: np.random.Generator) -> TakePlan:
    """Squat to pick a small object off the floor in front, stand back up holding it. 5 s at 60 fps.
    The knees pass 90 degrees of flexion, as a deep squat does."""
    fps, duration = 60.0, 5.0
    t = np.arange(int(round(duration * fps))) / fps
    ys = _stand_pelvis_y(0.01)
    hx = _hip_x()
    keys_down = [(0.0, 0.0), (0.8, 0.0), (2.0, 1.0), (2.6, 1.0), (3.8, 0.0), (duration, 0.0)]
    d = keyed(t, keys_down)   # 0 standing .. 1 bottom of the squat
    pel = np.stack([np.zeros_like(t), ys - 0.44 * d, -0.12 * d], axis=-1)
    feet = {}
    for side, sgn in (("L", 1.0), ("R", -1.0)):
        st = [Stance(0.0, duration, np.array([sgn * hx * 1.7, 0.0, 0.02]), sgn * np.deg2rad(14.0),
                     (0.0, 0.0), _slide(rng, 0.3, 0.8), 0.0)]
        feet[side] = feet_from_plan(t, st, _ball_offset())
    hd = np.zeros(len(t))
    curves = _standing_curves(t, hd)
    curves["pelvis_tilt"] = np.deg2rad(4.0) + np.deg2rad(30.0) * d
    curves["spine_flex"] = np.deg2rad(32.0) * d
    curves["neck_flex"] = -np.deg2rad(25.0) * d
    curves["look_pitch"] = np.deg2rad(5.0) + np.deg2rad(40.0) * d
    holding = smoothstep((t - 2.4) / 0.4)
    for side in ("L", "R"):
        curves[f"{side}_swing"] = np.deg2rad(keyed(t, [(0.0, 4.0), (0.8, 4.0), (2.0, 60.0), (2.6, 62.0),
                                                       (3.8, 35.0), (duration, 32.0)]))
        curves[f"{side}_elbow"] = np.deg2rad(keyed(t, [(0.0, 12.0), (0.8, 12.0), (2.0, 15.0), (2.6, 20.0),
                                                       (3.8, 85.0), (duration, 88.0)]))
        curves[f"{side}_hang"] = np.deg2rad(84.0 - 14.0 * holding)
        curves[f"{side}_curl"] = np.deg2rad(18.0 + 45.0 * holding)
        curves[f"{side}_reach"] = np.deg2rad(12.0) * d
    return TakePlan("crouch_pick", fps, t, pel, hd, feet, curves, knee_out=np.deg2rad(14.0))


BOX_TOP_M = 0.30           # the box step's top, above the floor
BOX_SPAN_Z_M = (0.45, 0.95)  # front and back edges along the walking direction


def take_box_step(rng: np.random.Generator) -> TakePlan:
    """Step up onto a 30 cm box (left foot first), stand, step down off its far side (right foot
    first). Contacts at two support heights. 6 s at 90 fps."""
    fps, duration = 90.0, 6.0
    t = np.arange(int(round(duration * fps))) / fps
    hx = _hip_x() * 1.05
    up = BOX_TOP_M
    heel = (np.deg2rad(20.0), 0.3)
    plan = {
        "L": [(0.0, 0.9, 0.0, 0.0), (1.55, 4.45, up, 0.62), (5.2, duration, 0.0, 1.32)],
        "R": [(0.0, 1.95, 0.0, 0.0), (2.6, 3.55, up, 0.70), (4.25, duration, 0.0, 1.30)],
    }
    feet = {}
    for side, sgn in (("L", 1.0), ("R", -1.0)):
        st = [Stance(a, b, np.array([sgn * hx, h, z]), sgn * np.deg2rad(6.0), heel, _slide(rng, 0.2, 0.8),
                     0.10) for a, b, h, z in plan[side]]
        feet[side] = feet_from_plan(t, st, _ball_offset())
    ys = _stand_pelvis_y(0.015)
    # Pelvis keys: forward over the box, up once the trailing foot leaves the floor, down through the
    # loaded leg on the box before the leading foot reaches the floor, sideways over each single support.
    pz = keyed(t, [(0.0, 0.0), (1.0, 0.02), (1.55, 0.18), (1.95, 0.36), (2.6, 0.62), (3.3, 0.66),
                   (3.55, 0.68), (4.25, 0.98), (4.6, 1.10), (5.2, 1.28), (5.6, 1.31), (duration, 1.31)])
    py = keyed(t, [(0.0, ys), (1.2, ys - 0.01), (1.95, ys + 0.03), (2.6, ys + 0.28), (2.9, ys + up),
                   (3.55, ys + up), (4.25, ys - 0.03), (4.7, ys - 0.02), (5.5, ys), (duration, ys)])
    px = keyed(t, [(0.0, 0.0), (0.5, -0.01), (1.0, -0.04), (1.45, -0.03), (1.95, 0.02), (2.3, 0.045),
                   (2.7, 0.02), (3.2, 0.0), (3.6, 0.03), (3.95, 0.045), (4.3, 0.0), (4.7, -0.04),
                   (5.0, -0.04), (5.5, 0.0), (duration, 0.0)])
    pel = np.stack([px, py, pz], axis=-1)
    hd = np.zeros(len(t))
    curves = _standing_curves(t, hd)
    effort = keyed(t, [(0.0, 0.0), (1.2, 0.0), (1.9, 1.0), (2.6, 0.2), (3.6, 0.0), (4.2, 0.5),
                       (5.0, 0.0), (duration, 0.0)])
    curves["spine_flex"] = np.deg2rad(14.0) * effort
    curves["pelvis_tilt"] = np.deg2rad(4.0) + np.deg2rad(10.0) * effort
    curves["pelvis_roll"] = -np.deg2rad(60.0) * px
    curves["look_pitch"] = np.deg2rad(18.0) - np.deg2rad(8.0) * smoothstep((t - 2.5) / 1.0)
    swing = np.deg2rad(12.0) * np.sin(2 * np.pi * (t - 0.9) / 2.2) * smoothstep((t - 0.8) / 0.5)
    curves["L_swing"], curves["R_swing"] = np.deg2rad(4.0) - swing, np.deg2rad(4.0) + swing
    return TakePlan("box_step", fps, t, pel, hd, feet, curves)


def take_idle(rng: np.random.Generator) -> TakePlan:
    """Standing idle: slow weight shifts, breathing, a look around, hands relaxed. 4 s at 60 fps."""
    fps, duration = 60.0, 4.0
    t = np.arange(int(round(duration * fps))) / fps
    hx = _hip_x()
    feet = {}
    for side, sgn in (("L", 1.0), ("R", -1.0)):
        st = [Stance(0.0, duration, np.array([sgn * hx * 1.15, 0.0, 0.01 * sgn]), sgn * np.deg2rad(9.0),
                     (0.0, 0.0), _slide(rng, 0.2, 0.5), 0.0)]
        feet[side] = feet_from_plan(t, st, _ball_offset())
    ph = rng.uniform(0, 2 * np.pi, size=6)
    sway = 0.03 * np.sin(2 * np.pi * 0.25 * t + ph[0])
    breath = np.sin(2 * np.pi * 0.28 * t + ph[1])
    pel = np.stack([sway, _stand_pelvis_y(0.012) - 0.006 * np.abs(np.sin(2 * np.pi * 0.25 * t + ph[0]))
                    + 0.002 * breath, 0.005 * np.sin(2 * np.pi * 0.13 * t + ph[2])], axis=-1)
    hd = np.deg2rad(3.0) * np.sin(2 * np.pi * 0.11 * t + ph[3])
    curves = _standing_curves(t, hd)
    curves["pelvis_roll"] = -np.deg2rad(80.0) * sway
    curves["spine_bend"] = np.deg2rad(60.0) * sway
    curves["spine_flex"] = np.deg2rad(1.5) * breath
    curves["look_yaw"] = hd + np.deg2rad(35.0) * np.sin(np.pi * smoothstep((t - 1.0) / 2.4)) * \
        np.sin(2 * np.pi * 0.2 * (t - 1.0))
    for k, side in enumerate(("L", "R")):
        curves[f"{side}_swing"] = np.deg2rad(3.0 + 2.0 * np.sin(2 * np.pi * 0.2 * t + ph[4 + k]))
        curves[f"{side}_curl"] = np.deg2rad(20.0 + 6.0 * np.sin(2 * np.pi * 0.15 * t + ph[4 + k]))
    curves["L_shrug"] = np.deg2rad(3.0) * breath
    curves["R_shrug"] = np.deg2rad(3.0) * breath
    return TakePlan("idle", fps, t, pel, hd, feet, curves)


#: Take name -> builder. File names are demo_clips/capture/<name>.bvh and <name>.contacts.csv.
TAKES = {
    "walk": take_walk,
    "walk_curve": take_walk_curve,
    "jog": take_jog,
    "turn": take_turn,
    "jump": take_jump,
    "crouch_pick": take_crouch_pick,
    "box_step": take_box_step,
    "idle": take_idle,
}


# =====================================================================================================
# Building and writing
# =====================================================================================================

def take_rng(name: str) -> np.random.Generator:
    """The take's own seeded generator, so one take can be rebuilt alone with the same bytes."""
    return np.random.default_rng([SEED, zlib.crc32(name.encode())])


@dataclass(frozen=True)
class BuiltTake:
    """A finished take. motion: on the capture skeleton in the capture's space; contacts: (F, 2) bool
    (left, right), the planned stance phases; support: (F, 2) support heights in capture units (NaN in
    the air); info: diagnostics."""

    name: str
    motion: Motion
    contacts: np.ndarray
    support: np.ndarray
    info: dict


def to_file_space(local: np.ndarray, root: np.ndarray, space: FileSpace) -> tuple[np.ndarray, np.ndarray]:
    """Working-space local rotations (F, J, 4) and root positions (F, 3) -> the file's space and units:
    every rotation is conjugated by the change of basis, positions are turned and scaled."""
    qc = quat.from_matrix(space.matrix)
    rot = quat.multiply(quat.multiply(qc, local), quat.conjugate(qc))
    return quat.make_continuous(rot), space.units_per_metre * root @ space.matrix.T


def build_take(name: str) -> BuiltTake:
    """Build one take (deterministic: the same bytes every time)."""
    rng = take_rng(name)
    plan = TAKES[name](rng)
    local, root, info = assemble(plan, rng)
    local, root = add_capture_noise(local, root, plan.fps, rng)
    rot, root_c = to_file_space(local, root, CAPTURE_SPACE)
    skel = capture_skeleton()
    motion = Motion(skel, rot, root_c, plan.fps, source=f"{name}.bvh")
    contacts = np.stack([plan.feet["L"].contact, plan.feet["R"].contact], axis=-1)
    support = np.stack([plan.feet["L"].support, plan.feet["R"].support], axis=-1) * CAPTURE_SPACE.units_per_metre
    return BuiltTake(name, motion, contacts, support, info)


def contacts_csv(contacts: np.ndarray) -> bytes:
    """The contact flags as CSV text: header ``frame,left,right``, one row per frame, 0/1."""
    rows = ["frame,left,right"]
    rows += [f"{i},{int(a)},{int(b)}" for i, (a, b) in enumerate(contacts)]
    return ("\n".join(rows) + "\n").encode("ascii")


def write_take(name: str, folder: Path) -> BuiltTake:
    """Write <folder>/<name>.bvh and <folder>/<name>.contacts.csv."""
    built = build_take(name)
    folder.mkdir(parents=True, exist_ok=True)
    write_bvh(folder / f"{name}.bvh", built.motion)
    atomic_write(folder / f"{name}.contacts.csv", contacts_csv(built.contacts))
    return built


def write_rig(name: str, folder: Path) -> Skeleton:
    """Write <folder>/<name>.bvh: one frame holding the rest pose (the zero pose)."""
    skel = RIGS[name][0]()
    folder.mkdir(parents=True, exist_ok=True)
    write_bvh(folder / f"{name}.bvh", Motion.rest(skel, frames=1, fps=30.0))
    return skel


def write_rig_gltf(name: str, folder: Path) -> Path:
    """Write <folder>/<name>.glb: the same rig as a skinned glTF character. Joint axes are bone-aligned
    (each joint's local +Y along its bone, as many game rigs have them), the body is one box per bone
    bound to the joint it hangs from, and the file is in glTF's space (+Y up, faces +Z, metres)."""
    from retarget.convention import Convention
    from retarget.io.gltf import write_gltf_rig
    from retarget.io.gltf_rig import bone_aligned

    builder, space = RIGS[name][0], RIGS[name][1]
    conv = Convention(space.up, space.forward, 1.0 / space.units_per_metre, space.units)
    folder.mkdir(parents=True, exist_ok=True)
    return write_gltf_rig(folder / f"{name}.glb", bone_aligned(builder()), mesh=True, convention=conv)


def generate(out: Path = HERE, takes=None, rigs=None) -> dict[str, BuiltTake]:
    """Write the takes into out/capture and the rigs into out/rigs (all of them by default)."""
    out = Path(out)
    built = {}
    for name in (TAKES if takes is None else takes):
        built[name] = write_take(name, out / "capture")
    for name in (RIGS if rigs is None else rigs):
        write_rig(name, out / "rigs")
        write_rig_gltf(name, out / "rigs")
    return built


def main(argv: list[str] | None = None) -> int:
    ap = argparse.ArgumentParser(description="Regenerate the demo world (seeded, byte-identical).")
    ap.add_argument("--out", type=Path, default=HERE, help="folder to write capture/ and rigs/ into")
    ap.add_argument("--take", action="append", choices=sorted(TAKES), help="only these takes")
    ap.add_argument("--rig", action="append", choices=sorted(RIGS), help="only these rigs")
    ap.add_argument("-v", "--verbose", action="store_true", help="print a line per file")
    a = ap.parse_args(argv)
    only = a.take is not None or a.rig is not None
    built = generate(a.out, a.take if only else None, a.rig if only else None)
    if a.verbose:
        for name, b in built.items():
            share = b.contacts.mean(axis=0)
            print(f"{name:12s} {b.motion.num_frames:4d} frames @ {b.motion.fps:g} fps  "
                  f"stance L {share[0]:.3f} R {share[1]:.3f}  {b.info}")
    return 0


if __name__ == "__main__":
    sys.exit(main())
