"""One body, one motion, rendered onto differently built rigs: ground truth for alignment and transfer.

The body is a humanoid joint tree in canonical space (+Y up, facing +Z, metres) whose rest pose is a
T-pose with every global rotation the identity. A rig keeps a subset of the body's joints, under its own
names, in its own axes, units, channel orders and rest posture (T-pose, A-pose, or a degenerate zero pose
with the joint orientation baked into the channels). Rendering a body motion onto a rig follows one rule:

    a kept joint's global orientation is the body's, times a constant that maps the rig's joint frame
    (its zero-pose frame) to the body's frame in the rig's rest posture.

Rig offsets come from the body's rest posture, so the rig's forward kinematics reproduce the body's joint
positions exactly whenever the joints the rig drops only twist about their own outgoing bone (that is
what `random_pose(..., twist_only=...)` and `walk` produce for the joints dropped by some rig). Both
renderings are then exact images of one performance, and retargeting one onto the other has a true
answer to compare with.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from retarget import quat
from retarget.convention import Convention
from retarget.motion import Motion, forward_kinematics
from retarget.skeleton import Skeleton

# ----- the body ---------------------------------------------------------------------------------------
# (name, parent, offset from parent in metres, end-site tip or None). Proportions are invented, roughly
# adult (about 1.75 m tall).

_CENTRE = [
    ("pelvis", None, (0.0, 0.97, 0.0), None),
    ("spine1", "pelvis", (0.0, 0.10, -0.01), None),
    ("spine2", "spine1", (0.0, 0.10, -0.005), None),
    ("spine3", "spine2", (0.0, 0.10, 0.0), None),
    ("chest", "spine3", (0.0, 0.12, 0.01), None),
    ("neck1", "chest", (0.0, 0.09, 0.01), None),
    ("neck2", "neck1", (0.0, 0.05, 0.01), None),
    ("head", "neck2", (0.0, 0.07, 0.01), (0.0, 0.18, 0.02)),
]


def _side(s: str, x: float) -> list:
    return [
        (f"collar_{s}", "chest", (x * 0.03, 0.06, 0.02), None),
        (f"shoulder_{s}", f"collar_{s}", (x * 0.14, 0.0, -0.02), None),
        (f"shoulder_twist_{s}", f"shoulder_{s}", (x * 0.14, 0.0, 0.0), (x * 0.05, 0.0, 0.0)),
        (f"elbow_{s}", f"shoulder_{s}", (x * 0.28, 0.0, 0.0), None),
        (f"elbow_twist_{s}", f"elbow_{s}", (x * 0.13, 0.0, 0.0), (x * 0.05, 0.0, 0.0)),
        (f"wrist_{s}", f"elbow_{s}", (x * 0.25, 0.0, 0.0), None),
        (f"finger_{s}", f"wrist_{s}", (x * 0.09, 0.0, 0.0), (x * 0.08, 0.0, 0.0)),
        (f"buttock_{s}", "pelvis", (x * 0.09, -0.03, 0.0), None),
        (f"thigh_{s}", f"buttock_{s}", (0.0, -0.05, 0.0), None),
        (f"knee_{s}", f"thigh_{s}", (0.0, -0.42, 0.01), None),
        (f"ankle_{s}", f"knee_{s}", (0.0, -0.40, -0.02), None),
        (f"toe_{s}", f"ankle_{s}", (0.0, -0.06, 0.13), (0.0, -0.01, 0.05)),
    ]


_BODY = _CENTRE + _side("l", 1.0) + _side("r", -1.0)


def _order_topologically(rows):
    """Depth-first order from the root (children in listing order), as a BVH file lists joints, so a
    rig written to a file and read back keeps its joint indices."""
    out = []

    def visit(name):
        for r in rows:
            if r[0] == name:
                out.append(r)
        for r in rows:
            if r[1] == name:
                visit(r[0])

    visit(rows[0][0])
    return out


_BODY = _order_topologically(_BODY)
NAMES = tuple(r[0] for r in _BODY)
INDEX = {n: i for i, n in enumerate(NAMES)}
PARENTS = np.array([-1 if r[1] is None else INDEX[r[1]] for r in _BODY])
OFFSETS = np.array([r[2] for r in _BODY], dtype=float)
TIPS = np.array([r[3] if r[3] is not None else (np.nan,) * 3 for r in _BODY], dtype=float)
BODY = Skeleton(NAMES, PARENTS, OFFSETS, tips=TIPS, source="<body>")
N = len(NAMES)
HEIGHT = 1.75  # roughly: toe at 0, head tip at about 1.73

# Segments compared in the tests: (start, end) body joints. "pelvis->spine top, spine top->head, upper
# arm, forearm, thigh, shin, foot".
SEGMENTS = [("pelvis", "chest"), ("chest", "head")]
for _s in "lr":
    SEGMENTS += [(f"shoulder_{_s}", f"elbow_{_s}"), (f"elbow_{_s}", f"wrist_{_s}"),
                 (f"thigh_{_s}", f"knee_{_s}"), (f"knee_{_s}", f"ankle_{_s}"), (f"ankle_{_s}", f"toe_{_s}")]


def rot(axis, degrees) -> np.ndarray:
    a = np.asarray(axis, dtype=float)
    return quat.from_axis_angle(a / np.linalg.norm(a), np.deg2rad(degrees))


# ----- rigs -------------------------------------------------------------------------------------------

@dataclass
class RigSpec:
    """How a rig is built from the body.

    names: body joint -> rig joint name, for the joints kept (the body's root must be kept).
    up, forward: the rig file's axes; unit: metres per file unit.
    posture: body joint -> local rotation (body frame) giving the rig's rest posture.
    root_channels, channels: BVH channel lists; degenerate: zero pose with every bone along local +X
    (the joint orientation lives in the rotation channels), all joints with position channels.
    """

    names: dict
    up: str = "+Y"
    forward: str = "+Z"
    unit: float = 1.0
    posture: dict = field(default_factory=dict)
    root_channels: tuple = ("Xposition", "Yposition", "Zposition", "Zrotation", "Xrotation", "Yrotation")
    channels: tuple = ("Zrotation", "Xrotation", "Yrotation")
    degenerate: bool = False
    proportions: dict = field(default_factory=dict)  # body joint -> factor on its offset and end site

    @property
    def convention(self) -> Convention:
        return Convention(self.up, self.forward, self.unit)


@dataclass
class Rig:
    spec: RigSpec
    skeleton: Skeleton
    body_index: np.ndarray          # (J,) body joint of each rig joint
    frames: np.ndarray              # (J, 4) W: canonical orientation of each rig joint frame at rest posture
    posture_globals: np.ndarray     # (N, 4) body globals in the rest posture
    posture_positions: np.ndarray   # (N, 3)

    @property
    def convention(self) -> Convention:
        return self.spec.convention


def scaled_body(proportions: dict) -> tuple[np.ndarray, np.ndarray]:
    """Body offsets and tips with some bones scaled: proportions maps body joint -> factor."""
    offsets, tips = OFFSETS.copy(), TIPS.copy()
    for name, k in proportions.items():
        offsets[INDEX[name]] *= k
        tips[INDEX[name]] *= k
    return offsets, tips


def posture_pose(posture: dict, proportions: dict | None = None) -> tuple[np.ndarray, np.ndarray]:
    """Body globals and positions (canonical) in a posture; with proportions the body stands on y = 0."""
    local = quat.identity((1, N))
    for name, q in posture.items():
        local[0, INDEX[name]] = q
    offsets, tips = scaled_body(proportions or {})
    sk = BODY.with_rest(offsets=offsets, tips=tips)
    g, p = forward_kinematics(sk, local, offsets[:1])
    g, p = g[0], p[0]
    if proportions:
        ends = p + quat.rotate(g, np.nan_to_num(tips)) + np.where(np.isnan(tips), np.nan, 0.0)
        p = p - np.array([0.0, np.nanmin(np.concatenate([p[:, 1], ends[:, 1]])), 0.0])
    return g, p


def _chain_end(j: int, pos: np.ndarray, grot: np.ndarray, tips: np.ndarray = TIPS) -> np.ndarray | None:
    """Follow the body's first children from j to a leaf; its tip position (or the leaf position)."""
    k = j
    kids = BODY.children
    while kids[k]:
        k = kids[k][0]
    if not np.isnan(tips[k]).any():
        return pos[k] + quat.rotate(grot[k], tips[k])
    return pos[k] if k != j else None


def build_rig(spec: RigSpec) -> Rig:
    keep = [n for n in NAMES if n in spec.names]
    assert keep[0] == NAMES[0], "the body's root must be kept"
    bidx = np.array([INDEX[n] for n in keep])
    conv = spec.convention
    c = conv.file_to_canonical()
    qc = quat.from_matrix(c)
    s = spec.unit
    gpb, ppb = posture_pose(spec.posture, spec.proportions)
    _, btips = scaled_body(spec.proportions)
    kept = set(keep)

    def kept_parent(b: int) -> int:
        p = int(PARENTS[b])
        while p >= 0 and NAMES[p] not in kept:
            p = int(PARENTS[p])
        return p

    parents = [-1] + [keep.index(NAMES[kept_parent(b)]) for b in bidx[1:]]
    nj = len(keep)
    # Rig joint frames at the rest posture (canonical): file axes for a normal rig; for a degenerate rig a
    # frame whose +X runs along the joint's main bone.
    frames = np.tile(qc, (nj, 1))
    if spec.degenerate:
        for j, b in enumerate(bidx):
            kids = [k for k in range(nj) if parents[k] == j]
            if kids:
                main = max(kids, key=lambda k: _subtree(bidx[k], kept))
                d = ppb[bidx[main]] - ppb[b]
            else:
                end = _chain_end(int(b), ppb, gpb, btips)
                d = (end - ppb[b]) if end is not None else np.array([1.0, 0.0, 0.0])
            x = d / np.linalg.norm(d)
            y = np.array([0.0, 0.0, 1.0]) - x[2] * x
            if np.linalg.norm(y) < 1e-6:
                y = np.array([0.0, 1.0, 0.0]) - x[1] * x
            y /= np.linalg.norm(y)
            frames[j] = quat.from_matrix(np.stack([x, y, np.cross(x, y)], axis=1))
    offsets = np.empty((nj, 3))
    offsets[0] = c.T @ ppb[bidx[0]] / s
    for j in range(1, nj):
        p = parents[j]
        offsets[j] = quat.rotate(quat.conjugate(frames[p]), ppb[bidx[j]] - ppb[bidx[p]]) / s
    tips = np.full((nj, 3), np.nan)
    for j in range(nj):
        if j not in parents:
            end = _chain_end(int(bidx[j]), ppb, gpb, btips)
            if spec.degenerate:
                tips[j] = 0.0  # zero-length end sites, as some exporters write
            elif end is not None:
                tips[j] = quat.rotate(quat.conjugate(frames[j]), end - ppb[bidx[j]]) / s
    names = tuple(spec.names[n] for n in keep)
    if spec.degenerate:
        chans = tuple(tuple(spec.root_channels) for _ in range(nj))
    else:
        chans = (tuple(spec.root_channels),) + tuple(tuple(spec.channels) for _ in range(nj - 1))
    sk = Skeleton(names, np.array(parents), offsets, tips=tips, channels=chans, source="<rig>")
    return Rig(spec, sk, bidx, frames, gpb, ppb)


def _subtree(b: int, kept: set) -> int:
    n = 0
    stack = [b]
    while stack:
        k = stack.pop()
        n += NAMES[k] in kept
        stack.extend(BODY.children[k])
    return n


def render(rig: Rig, body_local: np.ndarray, body_root: np.ndarray, fps: float = 30.0) -> Motion:
    """The body motion (local rotations (F, N, 4) in body frames, root positions (F, 3) metres) on a rig."""
    gb, _ = forward_kinematics(BODY, body_local, body_root)
    conv = rig.convention
    qc_inv = quat.conjugate(quat.from_matrix(conv.file_to_canonical()))
    b = rig.body_index
    corr = quat.multiply(quat.conjugate(rig.posture_globals[b]), rig.frames)  # (J, 4)
    g_can = quat.multiply(gb[:, b], corr)
    g_file = quat.multiply(qc_inv, g_can)
    sk = rig.skeleton
    local = np.empty_like(g_file)
    local[:, 0] = g_file[:, 0]
    for j in range(1, sk.num_joints):
        local[:, j] = quat.multiply(quat.conjugate(g_file[:, sk.parents[j]]), g_file[:, j])
    root = (body_root @ conv.file_to_canonical()) / rig.spec.unit
    translations = None
    if any(sk.has_position_channels(j) for j in range(1, sk.num_joints)):
        translations = np.broadcast_to(sk.offsets, (len(root), sk.num_joints, 3)).copy()
        translations[:, 0] = root
    return Motion(sk, local, root, fps, translations)


def rest_motion(rig: Rig, frames: int = 1) -> tuple[np.ndarray, np.ndarray]:
    """Body local rotations and root path holding the rig's own rest posture."""
    local = quat.identity((frames, N))
    for name, q in rig.spec.posture.items():
        local[:, INDEX[name]] = q
    return local, np.tile(OFFSETS[0], (frames, 1))


def truth_pairs(a: Rig, b: Rig) -> list[tuple[int, int]]:
    """(joint of a, joint of b) for every body joint kept by both."""
    where_b = {int(x): j for j, x in enumerate(b.body_index)}
    return [(i, where_b[int(x)]) for i, x in enumerate(a.body_index) if int(x) in where_b]


def canonical_world(motion: Motion, conv: Convention) -> tuple[np.ndarray, np.ndarray]:
    """Global rotations (C * G) and positions (metres, canonical) of a rendered or retargeted clip."""
    g, p = motion.global_transforms()
    c = conv.file_to_canonical()
    return quat.multiply(quat.from_matrix(c), g), conv.scale * (p @ c.T)


# ----- motions ----------------------------------------------------------------------------------------

def _bone_axis(j: int) -> np.ndarray:
    """The body joint's outgoing bone direction in its own frame (first child, or tip)."""
    kids = BODY.children[j]
    d = OFFSETS[kids[0]] if kids else TIPS[j]
    return d / np.linalg.norm(d)


def random_pose(rng: np.random.Generator, frames: int, twist_only=(), max_deg: float = 50.0
                ) -> tuple[np.ndarray, np.ndarray]:
    """Random body poses: every joint turned up to ``max_deg`` about a random axis, except the joints in
    ``twist_only``, turned only about their own outgoing bone. The root gets any orientation."""
    axes = rng.normal(size=(frames, N, 3))
    axes /= np.linalg.norm(axes, axis=-1, keepdims=True)
    angles = np.deg2rad(rng.uniform(-max_deg, max_deg, size=(frames, N)))
    for name in twist_only:
        j = INDEX[name]
        axes[:, j] = _bone_axis(j)
    local = quat.from_axis_angle(axes, angles)
    root_axis = rng.normal(size=(frames, 3))
    root_axis /= np.linalg.norm(root_axis, axis=-1, keepdims=True)
    local[:, 0] = quat.from_axis_angle(root_axis, rng.uniform(0, np.pi, size=frames))
    root = OFFSETS[0] + rng.normal(scale=0.5, size=(frames, 3))
    return local, root


def walk(frames: int = 120, fps: float = 30.0, twist_only=()) -> tuple[np.ndarray, np.ndarray]:
    """A procedural walk at about 1.3 m/s towards +Z: hips, knees, ankles and arms swing, the pelvis bobs
    and turns, the spine counter-rotates. Joints in ``twist_only`` only twist about their bone."""
    t = np.arange(frames) / fps
    ph = 2 * np.pi * t / 1.1  # gait cycle 1.1 s
    local = quat.identity((frames, N))

    def put(name, q):
        local[:, INDEX[name]] = q

    put("pelvis", quat.multiply(rot((0, 1, 0), 6 * np.sin(ph)), rot((0, 0, 1), 3 * np.sin(ph))))
    for name in ("spine1", "spine2", "spine3", "chest"):
        if name in twist_only:
            put(name, quat.from_axis_angle(np.broadcast_to(_bone_axis(INDEX[name]), (frames, 3)),
                                           np.deg2rad(-2 * np.sin(ph))))
        else:
            put(name, quat.multiply(rot((0, 1, 0), -2 * np.sin(ph)), rot((1, 0, 0), 2 + np.cos(ph))))
    for name in ("neck1", "neck2"):
        if name in twist_only:
            put(name, quat.from_axis_angle(np.broadcast_to(_bone_axis(INDEX[name]), (frames, 3)),
                                           np.deg2rad(3 * np.sin(ph))))
        else:
            put(name, rot((1, 0, 0), -3 + np.sin(2 * ph)))
    put("head", rot((0, 1, 0), 4 * np.sin(ph)))
    for s, sign, shift in (("l", 1.0, 0.0), ("r", -1.0, np.pi)):
        p = ph + shift
        hip = 25 * np.sin(p)
        knee = 30 - 30 * np.cos(p + 0.6)
        put(f"thigh_{s}", rot((1, 0, 0), -hip))
        put(f"knee_{s}", rot((1, 0, 0), knee))
        put(f"ankle_{s}", rot((1, 0, 0), -10 * np.sin(p - 0.5)))
        put(f"toe_{s}", rot((1, 0, 0), np.clip(20 * np.sin(p + 1.0), 0, None)))
        # Arms hang (about forward) and swing opposite the leg (about the lateral axis).
        lower = rot((0, 0, 1), -sign * 75)
        put(f"shoulder_{s}", quat.multiply(rot((1, 0, 0), 20 * np.sin(p)), np.broadcast_to(lower, (frames, 4))))
        put(f"elbow_{s}", rot((0, 1, 0), sign * (20 + 10 * np.sin(p))))
        if f"collar_{s}" in twist_only:
            put(f"collar_{s}", quat.from_axis_angle(np.broadcast_to(_bone_axis(INDEX[f"collar_{s}"]),
                                                                    (frames, 3)), np.deg2rad(3 * np.sin(p))))
        if f"buttock_{s}" in twist_only:
            put(f"buttock_{s}", quat.from_axis_angle(np.broadcast_to(_bone_axis(INDEX[f"buttock_{s}"]),
                                                                     (frames, 3)), np.deg2rad(4 * np.sin(p))))
    root = np.stack([0.02 * np.sin(ph), OFFSETS[0, 1] - 0.02 + 0.02 * np.cos(2 * ph), 1.3 * t], axis=1)
    return local, root


# ----- two rigs of the same body ----------------------------------------------------------------------

def capture_spec(**over) -> RigSpec:
    """A capture-style rig: Z up, centimetres, T-pose, 5 spine joints with the pelvis, collars, fingers,
    hip joints; ZXY rotations, root ZYX."""
    names = {"pelvis": "Hips", "spine1": "Spine", "spine2": "Spine1", "spine3": "Spine2", "chest": "Chest",
             "neck1": "Neck", "neck2": "Neck1", "head": "Head"}
    for s, side in (("l", "Left"), ("r", "Right")):
        names.update({f"collar_{s}": f"{side}Shoulder", f"shoulder_{s}": f"{side}Arm",
                      f"elbow_{s}": f"{side}ForeArm", f"wrist_{s}": f"{side}Hand",
                      f"finger_{s}": f"{side}HandMiddle1", f"buttock_{s}": f"{side}HipJoint",
                      f"thigh_{s}": f"{side}UpLeg", f"knee_{s}": f"{side}Leg", f"ankle_{s}": f"{side}Foot",
                      f"toe_{s}": f"{side}ToeBase"})
    kw = dict(names=names, up="+Z", forward="-Y", unit=0.01,
              root_channels=("Xposition", "Yposition", "Zposition", "Zrotation", "Yrotation", "Xrotation"),
              channels=("Zrotation", "Xrotation", "Yrotation"))
    kw.update(over)
    return RigSpec(**kw)


def character_spec(**over) -> RigSpec:
    """A character-style rig: Y up, metres, facing +X, A-pose, 3 spine joints with the pelvis, no collars
    or hip joints, twist leaves on the arms; XYZ rotations."""
    names = {"pelvis": "root_pelvis", "spine2": "spine_01", "chest": "spine_02", "neck1": "neck",
             "head": "head"}
    for s in "lr":
        names.update({f"shoulder_{s}": f"upperarm_{s}", f"shoulder_twist_{s}": f"upperarm_twist_{s}",
                      f"elbow_{s}": f"lowerarm_{s}", f"elbow_twist_{s}": f"lowerarm_twist_{s}",
                      f"wrist_{s}": f"hand_{s}", f"thigh_{s}": f"thigh_{s}", f"knee_{s}": f"calf_{s}",
                      f"ankle_{s}": f"foot_{s}", f"toe_{s}": f"ball_{s}"})
    posture = {"shoulder_l": rot((0, 0, 1), -45), "shoulder_r": rot((0, 0, 1), 45),
               "elbow_l": rot((0, 0, 1), -10), "elbow_r": rot((0, 0, 1), 10),
               "thigh_l": rot((0, 0, 1), 5), "thigh_r": rot((0, 0, 1), -5)}
    kw = dict(names=names, up="+Y", forward="+X", unit=1.0, posture=posture,
              root_channels=("Xposition", "Yposition", "Zposition", "Xrotation", "Yrotation", "Zrotation"),
              channels=("Xrotation", "Yrotation", "Zrotation"))
    kw.update(over)
    return RigSpec(**kw)


# Body joints some rig above drops while others keep them: they only twist in test motions.
DROPPED = ("spine1", "spine3", "neck2", "collar_l", "collar_r", "buttock_l", "buttock_r")


# ----- measures ---------------------------------------------------------------------------------------

def segment_angles(motion_a: Motion, rig_a: Rig, motion_b: Motion, rig_b: Rig) -> dict:
    """Per body segment of SEGMENTS present on both rigs: the angle in degrees, per frame, between its
    world direction in clip a and in clip b (both read through each rig's own known convention)."""
    _, pa = canonical_world(motion_a, rig_a.convention)
    _, pb = canonical_world(motion_b, rig_b.convention)
    ia = {NAMES[b]: j for j, b in enumerate(rig_a.body_index)}
    ib = {NAMES[b]: j for j, b in enumerate(rig_b.body_index)}
    out = {}
    for s, e in SEGMENTS:
        if s in ia and e in ia and s in ib and e in ib:
            da = pa[:, ia[e]] - pa[:, ia[s]]
            db = pb[:, ib[e]] - pb[:, ib[s]]
            c = np.sum(da * db, -1) / (np.linalg.norm(da, axis=-1) * np.linalg.norm(db, axis=-1))
            out[(s, e)] = np.degrees(np.arccos(np.clip(c, -1.0, 1.0)))
    return out


def rotation_angles(motion_a: Motion, rig_a: Rig, motion_b: Motion, rig_b: Rig, joints=None) -> dict:
    """Per body joint kept by both rigs (or the ones named): the angle in degrees, per frame, between the
    joint's canonical global rotation in clip a and in clip b, each mapped back to the body's frame (so a
    rig's own joint frame does not count)."""
    ga, _ = canonical_world(motion_a, rig_a.convention)
    gb, _ = canonical_world(motion_b, rig_b.convention)
    ia = {NAMES[b]: j for j, b in enumerate(rig_a.body_index)}
    ib = {NAMES[b]: j for j, b in enumerate(rig_b.body_index)}
    out = {}
    for name in joints or [n for n in ia if n in ib]:
        ja, jb = ia[name], ib[name]
        # Body orientation = rig global * (rig frame)^-1 * body posture global.
        ba = quat.multiply(ga[:, ja], quat.multiply(quat.conjugate(rig_a.frames[ja]),
                                                    rig_a.posture_globals[rig_a.body_index[ja]]))
        bb = quat.multiply(gb[:, jb], quat.multiply(quat.conjugate(rig_b.frames[jb]),
                                                    rig_b.posture_globals[rig_b.body_index[jb]]))
        out[name] = np.degrees(quat.angle_between(ba, bb))
    return out


def summary(angles: dict) -> tuple[float, float]:
    """(mean, max) over all frames and entries of a dict of per-frame angle arrays."""
    allv = np.concatenate([np.ravel(v) for v in angles.values()])
    return float(allv.mean()), float(allv.max())
