"""One invented body and a family of skeleton variants built from it, each with its ground truth.

The body
--------
``BODY`` lists every joint any variant may have, in canonical space (+Y up, the figure faces +Z, its left
is +X, metres) for a 1.75 m figure in a T-pose. Heights and segment lengths follow the stature
fractions of Drillis and Contini as tabulated by Winter (Biomechanics and Motor Control of Human
Movement; recalled from memory): hip joint 0.53 H, knee 0.285 H, ankle 0.039 H, shoulder 0.818 H, upper
arm 0.186 H, forearm 0.146 H, hand 0.108 H, shoulder width 0.259 H, foot length 0.152 H. Where the table
is silent (spine joint spacing, finger layout, eyes, clavicle and buttock joints) the values are
invented and only need to look like a person.

Body joint names are fixed: ``pelvis``, ``spine_1`` .. ``spine_4``, ``chest``, ``neck``, ``head``,
``eye_l``, ``clavicle_l``, ``upperarm_l``, ``upperarm_twist_l``, ``forearm_l``, ``forearm_twist_l``,
``hand_l``, ``thumb_1_l`` .. ``pinky_3_l``, ``buttock_l``, ``thigh_l``, ``thigh_twist_l``, ``shin_l``,
``foot_l``, ``toe_l``, the same with ``_r``, and ``root`` (a ground joint above the pelvis).

The variants
------------
``make_variant(**options)`` keeps a subset of the body's joints (a removed joint merges into its child:
offsets add up, so every kept joint keeps its rest position), names them in one of several styles and
lays the result out in the file's axes and units. Every variant is BVH-like: identity rest rotations,
the offsets carry the pose, leaves carry end-site tips. It returns the Skeleton and the ground truth
``{variant joint name: body joint name}``.

Options: ``style`` (see ``STYLES``; "opaque" names joints j00, j01, ... in file order), ``spine`` (1-5
joints from pelvis to chest, the chest always kept), ``neck``, ``clavicles``, ``toes``, ``fingers``,
``twist`` (None, "inline": a joint in the chain halfway along the upper arm, forearm and thigh, or
"leaf": the same joints as leaf children of the upper arm, forearm and thigh), ``eyes``, ``buttocks`` (a
lead joint between pelvis and thigh, behind and above the hip joint), ``root`` (a ground joint above the
pelvis), ``up`` / ``forward`` (file axes), ``units`` ("m", "cm", "in"), ``pose`` ("T" or "A": arms
lowered 45 degrees from the shoulder), ``shuffle`` (a seed for shuffling every joint's children, or
None).

``variant_motion`` renders a motion of the full body onto a variant, so two variants can carry the
same movement (exact where the removed joints do not move).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from retarget import Motion, Skeleton, quat
from retarget.convention import UNIT_METRES, Convention

__all__ = ["BodyJoint", "BODY", "BODY_HEIGHT", "KEY_JOINTS", "STYLES", "FAMILY", "make_variant",
           "body_skeleton", "variant_motion", "variant_name"]

BODY_HEIGHT = 1.75


@dataclass(frozen=True)
class BodyJoint:
    """One joint of the body: its name, its parent's name, its T-pose position (canonical, in units of
    the body's height) and its end-site tip (same units) used when the joint ends a variant's chain.
    group: what decides whether a variant keeps it ("core" joints are always kept)."""

    name: str
    parent: str | None
    position: tuple[float, float, float]
    group: str = "core"
    tip: tuple[float, float, float] | None = None


def _sided(name: str, parent: str | None, pos, group="core", tip=None) -> list[BodyJoint]:
    """The left joint (x > 0) and its mirror image on the right."""
    out = []
    for s, sign in (("l", 1.0), ("r", -1.0)):
        p = None if parent is None else (parent.replace("*", s))
        t = None if tip is None else (sign * tip[0], tip[1], tip[2])
        out.append(BodyJoint(f"{name}_{s}", p, (sign * pos[0], pos[1], pos[2]), group, t))
    return out


def _build_body() -> list[BodyJoint]:
    b: list[BodyJoint] = [
        BodyJoint("root", None, (0.0, 0.0, 0.0), "root"),
        BodyJoint("pelvis", "root", (0.0, 0.55, 0.0)),
        BodyJoint("spine_1", "pelvis", (0.0, 0.59, -0.005), "spine"),
        BodyJoint("spine_2", "spine_1", (0.0, 0.63, -0.010), "spine"),
        BodyJoint("spine_3", "spine_2", (0.0, 0.67, -0.012), "spine"),
        BodyJoint("spine_4", "spine_3", (0.0, 0.71, -0.008), "spine"),
        BodyJoint("chest", "spine_4", (0.0, 0.75, 0.0)),
        BodyJoint("neck", "chest", (0.0, 0.83, -0.012), "neck"),
        BodyJoint("head", "neck", (0.0, 0.885, 0.0), "core", (0.0, 1.0, 0.01)),
    ]
    b += _sided("eye", "head", (0.032, 0.935, 0.06), "eye", (0.032, 0.935, 0.075))
    # Arm (T-pose along +X for the left side): clavicle from the chest to the shoulder.
    b += _sided("clavicle", "chest", (0.02, 0.80, 0.012), "clavicle")
    b += _sided("upperarm", "clavicle_*", (0.13, 0.818, 0.0))
    b += _sided("upperarm_twist", "upperarm_*", (0.13 + 0.093, 0.818, 0.0), "twist", (0.13 + 0.11, 0.818, 0.0))
    b += _sided("forearm", "upperarm_twist_*", (0.316, 0.818, 0.0))
    b += _sided("forearm_twist", "forearm_*", (0.316 + 0.073, 0.818, 0.0), "twist", (0.316 + 0.09, 0.818, 0.0))
    b += _sided("hand", "forearm_twist_*", (0.462, 0.818, 0.0), "core", (0.57, 0.818, 0.0))
    # Fingers, palm down: thumb ahead (+Z) and below, little finger behind.
    fingers = {
        "thumb": [(0.478, 0.806, 0.028), (0.505, 0.800, 0.048), (0.528, 0.798, 0.062), (0.548, 0.797, 0.072)],
        "index": [(0.522, 0.818, 0.020), (0.547, 0.817, 0.022), (0.564, 0.816, 0.023), (0.578, 0.815, 0.024)],
        "middle": [(0.525, 0.819, 0.005), (0.553, 0.818, 0.005), (0.572, 0.817, 0.005), (0.587, 0.816, 0.005)],
        "ring": [(0.520, 0.818, -0.010), (0.545, 0.817, -0.011), (0.563, 0.816, -0.012), (0.576, 0.815, -0.012)],
        "pinky": [(0.512, 0.816, -0.024), (0.531, 0.815, -0.026), (0.544, 0.814, -0.027), (0.554, 0.813, -0.028)],
    }
    for f, pts in fingers.items():
        b += _sided(f"{f}_1", "hand_*", pts[0], "finger")
        b += _sided(f"{f}_2", f"{f}_1_*", pts[1], "finger")
        b += _sided(f"{f}_3", f"{f}_2_*", pts[2], "finger", pts[3])
    # Leg: the buttock joint sits behind and above the hip joint, off the thigh's line.
    b += _sided("buttock", "pelvis", (0.062, 0.575, -0.035), "buttock")
    b += _sided("thigh", "buttock_*", (0.055, 0.53, 0.0))
    b += _sided("thigh_twist", "thigh_*", (0.055, 0.4075, 0.0025), "twist", (0.055, 0.39, 0.003))
    b += _sided("shin", "thigh_twist_*", (0.055, 0.285, 0.005))
    b += _sided("foot", "shin_*", (0.055, 0.039, -0.01), "core", (0.06, 0.005, 0.14))
    b += _sided("toe", "foot_*", (0.06, 0.012, 0.10), "toe", (0.062, 0.005, 0.15))
    return b


BODY: tuple[BodyJoint, ...] = tuple(_build_body())
_BY_NAME = {j.name: j for j in BODY}

KEY_JOINTS = ("pelvis", "chest", "neck", "head", "clavicle_l", "clavicle_r", "upperarm_l", "upperarm_r",
              "forearm_l", "forearm_r", "hand_l", "hand_r", "thigh_l", "thigh_r", "shin_l", "shin_r",
              "foot_l", "foot_r", "toe_l", "toe_r")

# Which spine joints a variant with n spine joints keeps (the chest is always the last).
_SPINE_KEEP = {1: (), 2: ("spine_2",), 3: ("spine_1", "spine_3"), 4: ("spine_1", "spine_2", "spine_3"),
               5: ("spine_1", "spine_2", "spine_3", "spine_4")}


# ----- naming styles ------------------------------------------------------------------------------------

def _split(body_name: str) -> tuple[str, str | None, int | None]:
    """"thumb_2_l" -> ("thumb", "l", 2); "upperarm_twist_r" -> ("upperarm_twist", "r", None)."""
    parts = body_name.split("_")
    side = parts.pop() if parts[-1] in ("l", "r") else None
    num = int(parts.pop()) if parts and parts[-1].isdigit() else None
    return "_".join(parts), side, num


_FINGERS = ("thumb", "index", "middle", "ring", "pinky")

# Per style: base-name words. Spine joints get a running number in each style's way.
_WORDS = {
    "snake": dict(pelvis="pelvis", spine="spine", chest="chest", neck="neck", head="head", eye="eye",
                  clavicle="clavicle", upperarm="upperarm", upperarm_twist="upperarm_twist",
                  forearm="lowerarm", forearm_twist="lowerarm_twist", hand="hand", thigh="thigh",
                  thigh_twist="thigh_twist", shin="calf", foot="foot", toe="ball", buttock="glute",
                  root="root", thumb="thumb", index="index", middle="middle", ring="ring", pinky="pinky"),
    "camel_left": dict(pelvis="Hips", spine="Spine", chest="Chest", neck="Neck", head="Head", eye="Eye",
                       clavicle="Collar", upperarm="UpperArm", upperarm_twist="UpperArmTwist",
                       forearm="LowerArm", forearm_twist="LowerArmTwist", hand="Wrist", thigh="UpperLeg",
                       thigh_twist="UpperLegTwist", shin="Knee", foot="Ankle", toe="Toes", buttock="Glute",
                       root="Root", thumb="Thumb", index="Index", middle="Middle", ring="Ring",
                       pinky="Little"),
    "dot_side": dict(pelvis="pelvis", spine="spine", chest="chest", neck="neck", head="head", eye="eye",
                     clavicle="shoulder", upperarm="upper_arm", upperarm_twist="upper_arm_roll",
                     forearm="forearm", forearm_twist="forearm_roll", hand="hand", thigh="thigh",
                     thigh_twist="thigh_roll", shin="shin", foot="foot", toe="toe", buttock="buttock",
                     root="root", thumb="thumb", index="finger_index", middle="finger_middle",
                     ring="finger_ring", pinky="finger_pinky"),
    "hanim": dict(pelvis="humanoid_root", chest="vt1", neck="vc7", head="skullbase", eye="eyeball_joint",
                  clavicle="sternoclavicular", upperarm="shoulder", upperarm_twist="shoulder_twist",
                  forearm="elbow", forearm_twist="forearm_twist", hand="wrist", thigh="hip",
                  thigh_twist="thigh_twist", shin="knee", foot="talocrural", toe="metatarsophalangeal_2",
                  buttock="gluteal", root="root", thumb="thumb", index="index", middle="middle", ring="ring",
                  pinky="pinky"),
    "glued": dict(pelvis="hip", spine="lumbar", chest="thorax", neck="neck", head="head", eye="eye",
                  clavicle="clavicle", upperarm="humerus", upperarm_twist="humerus_twist", forearm="radius",
                  forearm_twist="radius_twist", hand="hand", thigh="femur", thigh_twist="femur_twist",
                  shin="tibia", foot="foot", toe="toes", buttock="buttock", root="root", thumb="thumb",
                  index="index", middle="middle", ring="ring", pinky="pinky"),
    "caps_reversed": dict(pelvis="PELVIS", spine="SPINE", chest="CHEST", neck="NECK", head="HEAD", eye="EYE",
                          clavicle="CLAV", upperarm="ARM_UPPER", upperarm_twist="ARM_UPPER_TWIST",
                          forearm="ARM_LOWER", forearm_twist="ARM_LOWER_TWIST", hand="HAND",
                          thigh="LEG_UPPER", thigh_twist="LEG_UPPER_TWIST", shin="LEG_LOWER", foot="FOOT",
                          toe="TOE", buttock="HIP", root="ROOT", thumb="THUMB", index="INDEX",
                          middle="MIDDLE", ring="RING", pinky="PINKY"),
    "prefix_letter": dict(pelvis="hip", spine="abdomen", chest="chest", neck="neck", head="head", eye="Eye",
                          clavicle="Collar", upperarm="Shldr", upperarm_twist="ShldrTwist", forearm="ForeArm",
                          forearm_twist="ForeArmTwist", hand="Hand", thigh="Thigh", thigh_twist="ThighTwist",
                          shin="Shin", foot="Foot", toe="Toe", buttock="Buttock", root="root", thumb="Thumb",
                          index="Index", middle="Mid", ring="Ring", pinky="Pinky"),
}
_HANIM_SPINE = {"spine_1": "vl5", "spine_2": "vl1", "spine_3": "vt10", "spine_4": "vt6"}
STYLES = tuple(_WORDS) + ("opaque",)


def variant_name(body_name: str, style: str, spine_number: int | None = None) -> str:
    """The joint's name in a style (not for "opaque", which numbers joints in file order).
    spine_number: 1-based position of a kept spine joint, for styles that number them."""
    base, side, num = _split(body_name)
    words = _WORDS[style]
    if base == "spine":
        if style == "hanim":
            return _HANIM_SPINE[body_name]
        k = spine_number or num or 1
        return {"snake": f"spine_{k:02d}", "camel_left": f"Spine{k}", "dot_side": f"spine.{k:03d}",
                "glued": f"lumbar{k}", "caps_reversed": f"SPINE_{k}", "prefix_letter": f"abdomen{k}"}[style]
    word = words[base]
    if num is not None and base in _FINGERS:
        word = {"snake": f"{word}_{num:02d}", "camel_left": f"{word}{num}", "dot_side": f"{word}.{num:02d}",
                "hanim": f"{word}{num}", "glued": f"{word}{num}", "caps_reversed": f"{word}_{num}",
                "prefix_letter": f"{word}{num}"}[style]
    if side is None:
        return word
    return {"snake": f"{word}_{side}", "camel_left": ("Left" if side == "l" else "Right") + word,
            "dot_side": f"{word}.{side.upper()}", "hanim": f"{side}_{word}", "glued": f"{side}{word}",
            "caps_reversed": f"{word}_{'LF' if side == 'l' else 'RT'}",
            "prefix_letter": f"{side}{word}"}[style]


# ----- variants -------------------------------------------------------------------------------------------

def _kept(spine: int, neck: bool, clavicles: bool, toes: bool, fingers: bool, twist: str | None,
          eyes: bool, buttocks: bool, root: bool) -> list[str]:
    keep = []
    for j in BODY:
        g = j.group
        ok = (g == "core" or (g == "spine" and j.name in _SPINE_KEEP[spine]) or (g == "neck" and neck)
              or (g == "clavicle" and clavicles) or (g == "toe" and toes) or (g == "finger" and fingers)
              or (g == "twist" and twist is not None) or (g == "eye" and eyes)
              or (g == "buttock" and buttocks) or (g == "root" and root))
        if ok:
            keep.append(j.name)
    return keep


def _kept_parent(name: str, keep: set[str], twist: str | None) -> str | None:
    j = _BY_NAME[name]
    p = j.parent
    if twist == "leaf" and p is not None and _BY_NAME[p].group == "twist":
        # Twist joints as leaves: the next joint hangs from the twist joint's own parent.
        p = _BY_NAME[p].parent
    while p is not None and p not in keep:
        p = _BY_NAME[p].parent
        if twist == "leaf" and p is not None and _BY_NAME[p].group == "twist":
            p = _BY_NAME[p].parent
    return p


def _arm_pose_rotation(side: str, pose: str) -> np.ndarray:
    """Rotation (scalar-last) lowering an arm from the T-pose into the pose, about the forward axis."""
    if pose == "T":
        return quat.identity(())
    if pose != "A":
        raise ValueError(f"pose must be 'T' or 'A', got {pose!r}")
    angle = np.radians(-45.0 if side == "l" else 45.0)
    return quat.from_axis_angle(np.array([0.0, 0.0, 1.0]), angle)


def _arm_side(name: str) -> str | None:
    """'l' or 'r' for joints that move with an arm (upper arm and below), else None."""
    j = _BY_NAME[name]
    while j is not None:
        if j.name.startswith("upperarm_") and "twist" not in j.name:
            return j.name[-1]
        j = _BY_NAME.get(j.parent) if j.parent else None
    return None


def _canonical_layout(keep: list[str], twist: str | None, pose: str):
    """Kept joints' parents (body names), rest positions and tips in canonical metres."""
    keep_set = set(keep)
    parents = {n: _kept_parent(n, keep_set, twist) for n in keep}
    pos = {n: np.array(_BY_NAME[n].position) * BODY_HEIGHT for n in keep}
    has_child = {p for p in parents.values() if p is not None}
    tips = {n: (np.array(_BY_NAME[n].tip) * BODY_HEIGHT if n not in has_child and _BY_NAME[n].tip else None)
            for n in keep}
    if twist == "leaf":
        for n in keep:
            if _BY_NAME[n].group == "twist":
                tips[n] = np.array(_BY_NAME[n].tip) * BODY_HEIGHT
    for side in ("l", "r"):
        r = _arm_pose_rotation(side, pose)
        pivot = pos[f"upperarm_{side}"]
        for n in keep:
            if _arm_side(n) == side and n != f"upperarm_{side}":
                pos[n] = pivot + quat.rotate(r, pos[n] - pivot)
            if _arm_side(n) == side and tips[n] is not None:
                tips[n] = pivot + quat.rotate(r, tips[n] - pivot)
    return parents, pos, tips


def _order(keep: list[str], parents: dict, shuffle: int | None) -> list[str]:
    """Depth-first file order; with a seed, every joint's children in a shuffled order."""
    kids: dict[str | None, list[str]] = {}
    for n in keep:
        kids.setdefault(parents[n], []).append(n)
    rng = np.random.default_rng(shuffle) if shuffle is not None else None
    out: list[str] = []
    stack = list(reversed(kids[None]))
    while stack:
        n = stack.pop()
        out.append(n)
        ch = list(kids.get(n, []))
        if rng is not None:
            ch = [ch[i] for i in rng.permutation(len(ch))]
        stack.extend(reversed(ch))
    return out


def make_variant(style: str = "snake", spine: int = 3, neck: bool = True, clavicles: bool = True,
                 toes: bool = True, fingers: bool = False, twist: str | None = None, eyes: bool = False,
                 buttocks: bool = False, root: bool = False, up: str = "+Y", forward: str = "+Z",
                 units: str = "m", pose: str = "T", shuffle: int | None = None
                 ) -> tuple[Skeleton, dict[str, str]]:
    """A skeleton built from the body and its truth {variant joint name: body joint name}."""
    if style not in STYLES:
        raise ValueError(f"style must be one of {STYLES}, got {style!r}")
    if spine not in _SPINE_KEEP:
        raise ValueError(f"spine must be 1-5 joints, got {spine}")
    if twist not in (None, "inline", "leaf"):
        raise ValueError(f"twist must be None, 'inline' or 'leaf', got {twist!r}")
    keep = _kept(spine, neck, clavicles, toes, fingers, twist, eyes, buttocks, root)
    parents, pos, tips = _canonical_layout(keep, twist, pose)
    order = _order(keep, parents, shuffle)
    index = {n: i for i, n in enumerate(order)}
    conv = Convention(up, forward, UNIT_METRES[units])
    to_file = conv.file_to_canonical()  # row vectors: v_file = v_canonical @ file_to_canonical()
    scale = 1.0 / UNIT_METRES[units]
    par = np.array([-1 if parents[n] is None else index[parents[n]] for n in order])
    glob = np.array([pos[n] for n in order]) @ to_file * scale
    offsets = glob - np.vstack([np.zeros(3), glob[par[1:]]])
    offsets[0] = glob[0]
    tip_arr = np.full((len(order), 3), np.nan)
    for i, n in enumerate(order):
        if tips[n] is not None:
            tip_arr[i] = (tips[n] - pos[n]) @ to_file * scale
    spine_kept = [n for n in order if _BY_NAME[n].group == "spine"]
    spine_num = {n: k + 1 for k, n in enumerate(sorted(spine_kept))}
    if style == "opaque":
        names = [f"j{i:02d}" for i in range(len(order))]
    else:
        names = [variant_name(n, style, spine_num.get(n)) for n in order]
    sk = Skeleton(tuple(names), par, offsets, tips=tip_arr, source=f"variant:{style}")
    return sk, dict(zip(names, order))


def body_skeleton() -> Skeleton:
    """The whole body (every optional joint, twist joints inline), canonical metres, T-pose, body names."""
    sk, truth = make_variant("snake", spine=5, neck=True, clavicles=True, toes=True, fingers=True,
                             twist="inline", eyes=True, buttocks=True, root=True)
    return sk.renamed([truth[n] for n in sk.names])


def variant_motion(options: dict, body_rotations: np.ndarray, body_root_positions: np.ndarray,
                   fps: float = 30.0) -> Motion:
    """A motion of ``body_skeleton()`` rendered onto the variant ``make_variant(**options)``.

    body_rotations: (F, B, 4) local rotations of the body's joints; body_root_positions: (F, 3) canonical
    metres. Each kept joint takes the body joint's global rotation, turned into the variant's rest pose
    (A-pose arms) and file axes, so joint positions agree with the body's wherever the removed joints
    stay still. Twist joints as leaves are posed like their parent.
    """
    from retarget.motion import forward_kinematics

    body = body_skeleton()
    opts = dict(options)
    sk, truth = make_variant(**opts)
    bg, bp = forward_kinematics(body, body_rotations, np.broadcast_to(body_root_positions, (len(body_rotations), 3)))
    conv = Convention(opts.get("up", "+Y"), opts.get("forward", "+Z"), UNIT_METRES[opts.get("units", "m")])
    m = conv.file_to_canonical().T  # canonical -> file, column vectors
    axes = quat.from_matrix(m)
    f = len(body_rotations)
    glob = np.empty((f, sk.num_joints, 4))
    for i, n in enumerate(sk.names):
        bn = truth[n]
        g = bg[:, body.index(bn)]
        side = _arm_side(bn)
        if side is not None and opts.get("pose", "T") != "T":
            g = quat.multiply(g, quat.conjugate(_arm_pose_rotation(side, opts["pose"])))
        glob[:, i] = quat.multiply(quat.multiply(axes, g), quat.conjugate(axes))
    local = np.empty_like(glob)
    for i in range(sk.num_joints):
        p = sk.parents[i]
        local[:, i] = glob[:, i] if p < 0 else quat.multiply(quat.conjugate(glob[:, p]), glob[:, i])
    root_body = truth[sk.names[0]]
    root_pos = bp[:, body.index(root_body)] @ m.T / UNIT_METRES[opts.get("units", "m")]
    return Motion(sk, local, root_pos, fps)


# A family of variants covering every option; names in all styles, opaque twice.
FAMILY: tuple[dict, ...] = (
    dict(style="snake", spine=3, up="+Y", forward="+Z", units="m", pose="T"),
    dict(style="camel_left", spine=2, fingers=True, twist="leaf", up="+Z", forward="-Y", units="cm", pose="A"),
    dict(style="dot_side", spine=4, neck=False, toes=False, twist="inline", up="+Y", forward="+X", units="in",
         pose="T", shuffle=3),
    dict(style="hanim", spine=5, fingers=True, eyes=True, up="+Y", forward="-Z", units="m", pose="A"),
    dict(style="glued", spine=1, clavicles=False, twist="leaf", buttocks=True, up="+Z", forward="+X", units="cm",
         pose="T", shuffle=5),
    dict(style="caps_reversed", spine=3, toes=False, fingers=True, buttocks=True, root=True, up="+Y",
         forward="-Z", units="in", pose="A"),
    dict(style="prefix_letter", spine=2, fingers=True, eyes=True, buttocks=True, up="+Y", forward="+Z",
         units="cm", pose="T", shuffle=11),
    dict(style="opaque", spine=3, up="+Y", forward="+Z", units="m", pose="T"),
    dict(style="opaque", spine=1, neck=False, clavicles=False, toes=False, twist="inline", up="+Z", forward="+Y",
         units="cm", pose="A", shuffle=7),
    dict(style="opaque", spine=5, fingers=True, twist="leaf", eyes=True, root=True, up="+Y", forward="+X",
         units="in", pose="T", shuffle=2),
    dict(style="opaque", spine=4, buttocks=True, fingers=True, up="+Z", forward="-X", units="m", pose="A"),
    dict(style="snake", spine=5, fingers=True, twist="inline", eyes=True, root=True, up="+Z", forward="+X",
         units="cm", pose="A", shuffle=13),
    dict(style="camel_left", spine=1, neck=False, toes=False, up="+Y", forward="-Z", units="in", pose="T"),
    dict(style="hanim", spine=2, clavicles=False, twist="inline", buttocks=True, up="+Z", forward="-Y",
         units="cm", pose="T", shuffle=17),
)
