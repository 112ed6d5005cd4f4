"""Rest alignment: both skeletons in the canonical space and one constant rotation per mapped joint.

Canonical space is +Y up, the character facing +Z, metres (see convention.py). A file's axes are changed
by a rotation C (Convention.file_to_canonical) and its units by a scale s, on the *world* side only: a
global rotation G (taking joint-local vectors to file space) becomes C * G, a position p becomes s * C p.
Joint-local frames are left as the file has them, so local rotations of non-root joints and every bone
offset stay untouched, and the output needs no conversion but the inverse on its root.

For every mapped pair (source joint, target joint) an orthonormal *bone frame* is built on each side from
a reference pose (the rest pose, or an animated frame when a rest pose is degenerate):

- primary axis: along the bone from the joint to the next mapped joint of its chain (for the last mapped
  joint of a chain: to its own next chain joint or end site);
- secondary axis: the character's forward, made perpendicular to the primary axis, or the character's up
  for bones that point forward or backward (the same choice on both sides, so the frames correspond).

With source frame F_s and target frame F_t (both in canonical space), the constant

    Q = G_s_ref^-1 * (F_s * F_t^-1) * G_t_ref

turns a source global rotation into a target one, G_t(f) = G_s(f) * Q: in the source's reference pose each
target bone frame lands on its source bone frame, so a T-pose source puts an A-pose target into a T-pose.
Where a side has no bone direction (zero-length end sites) the pair takes the frame change of its nearest
mapped ancestor, i.e. keeps its reference pose relative to the parent.

Everything here is constant per clip; transfer.py applies it to every frame at once.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from . import quat
from .chains import BodyLayout, _is_degenerate, analyze_body
from .convention import Convention, detect_convention
from .errors import MappingError, OptionError, SkeletonError
from .motion import Motion, forward_kinematics
from .skeleton import Skeleton

__all__ = [
    "UP",
    "FORWARD",
    "ReferencePose",
    "Segment",
    "Alignment",
    "file_to_canonical_rotation",
    "globals_to_canonical",
    "positions_to_canonical",
    "reference_pose",
    "neutral_frame",
    "bone_frame",
    "leg_length",
    "standing_height",
    "align",
]

UP = np.array([0.0, 1.0, 0.0])
FORWARD = np.array([0.0, 0.0, 1.0])

# A bone whose direction is within about 41 degrees of the forward axis (|cos| > 0.75) takes "up" as its
# secondary axis: forward would be too close to the bone to give a stable perpendicular (common practice).
_FORWARD_BONE_COS = 0.75


# ----- axes and units --------------------------------------------------------------------------------

def file_to_canonical_rotation(convention: Convention) -> np.ndarray:
    """(4,) quaternion of the change of axes C from a file's space to the canonical space."""
    return quat.from_matrix(convention.file_to_canonical())


def globals_to_canonical(rotations: np.ndarray, convention: Convention) -> np.ndarray:
    """Global rotations (..., 4) in file space -> canonical space (C * G; joint-local frames unchanged)."""
    return quat.multiply(file_to_canonical_rotation(convention), rotations)


def positions_to_canonical(positions: np.ndarray, convention: Convention) -> np.ndarray:
    """Positions (..., 3) in file units and axes -> canonical metres (s * C p)."""
    return convention.scale * (np.asarray(positions, dtype=np.float64) @ convention.file_to_canonical().T)


# ----- reference poses -------------------------------------------------------------------------------

@dataclass(frozen=True)
class ReferencePose:
    """One pose of a skeleton in canonical space, the one bone frames are built from.

    rotations: (J, 4) global rotations, canonical (C * G_file).
    positions: (J, 3) global positions, canonical metres.
    tips: (J, 3) end-site positions, canonical metres, NaN where a joint has none.
    forward: (3,) unit horizontal vector the character faces in this pose.
    label: "rest" or "frame N".
    """

    rotations: np.ndarray = field(repr=False)
    positions: np.ndarray = field(repr=False)
    tips: np.ndarray = field(repr=False)
    forward: np.ndarray = field(repr=False)
    label: str = "rest"


def _body_forward(positions: np.ndarray, body: BodyLayout) -> np.ndarray | None:
    """Facing direction of a pose in canonical space from the left-right line of hips and shoulders:
    forward = left x up, flattened. None when the sides are unknown or the line is vertical.
    positions: (..., J, 3) -> (..., 3) or None."""
    if body.side_evidence == "none":
        return None
    left = (positions[..., body.legs["left"].root, :] - positions[..., body.legs["right"].root, :]
            + positions[..., body.arms["left"].root, :] - positions[..., body.arms["right"].root, :])
    f = np.cross(left, UP)
    f[..., 1] = 0.0
    n = np.linalg.norm(f, axis=-1, keepdims=True)
    if np.any(n < 1e-9):
        return None
    return f / n


def reference_pose(skeleton: Skeleton, convention: Convention, body: BodyLayout,
                   motion: Motion | None = None, frame: int | None = None) -> ReferencePose:
    """The pose bone frames are built from: the rest pose, or frame ``frame`` of ``motion``.

    When frame is None the rest pose is used unless it is degenerate (all bones along one line, as in
    files whose joint orientation is baked into the rotation channels); then the most neutral frame of
    the clip is used (see neutral_frame). A degenerate rest pose with no clip raises SkeletonError.
    """
    if frame is None:
        rest_pos = np.asarray(skeleton.rest_global[1])
        if not _is_degenerate(skeleton, rest_pos):
            rot = globals_to_canonical(skeleton.rest_global[0], convention)
            pos = positions_to_canonical(rest_pos, convention)
            tips = positions_to_canonical(skeleton.rest_tips, convention)
            fwd = _body_forward(pos, body)
            return ReferencePose(rot, pos, tips, FORWARD.copy() if fwd is None else fwd, "rest")
        if motion is None or motion.num_frames == 0:
            raise SkeletonError("the rest pose has every bone along one line, so it tells nothing about the "
                                "body's shape; give a file with animated frames to read the pose from",
                                path=skeleton.source)
        frame = neutral_frame(motion, convention, body)
    if motion is None:
        raise OptionError("a reference frame needs a clip")
    if not 0 <= frame < motion.num_frames:
        raise OptionError(f"reference frame {frame} is outside the clip's {motion.num_frames} frames",
                          path=motion.source)
    one = motion.slice(frame, frame + 1)
    grot, gpos = one.global_transforms()
    rot = globals_to_canonical(grot[0], convention)
    pos = positions_to_canonical(gpos[0], convention)
    tips_file = gpos[0] + quat.rotate(grot[0], np.nan_to_num(skeleton.tips))
    tips = positions_to_canonical(tips_file, convention) + np.where(np.isnan(skeleton.tips), np.nan, 0.0)
    fwd = _body_forward(pos, body)
    return ReferencePose(rot, pos, tips, FORWARD.copy() if fwd is None else fwd, f"frame {frame}")


def _angle_to(d: np.ndarray, axis: np.ndarray) -> np.ndarray:
    n = np.linalg.norm(d, axis=-1)
    with np.errstate(invalid="ignore", divide="ignore"):
        c = np.sum(d * axis, axis=-1) / n
    return np.arccos(np.clip(np.nan_to_num(c, nan=1.0), -1.0, 1.0))


def neutral_frame(motion: Motion, convention: Convention, body: BodyLayout) -> int:
    """Index of the clip's frame closest to a neutral standing pose.

    Scored per frame (vectorised over the clip): thighs and shins pointing straight down, the pelvis to
    chest line straight up, and upper arms and forearms hanging in the body's side plane (no forward or
    backward swing), so the frame relates to a T-pose by rotations about the forward axis only. That
    relation is what lets its bone frames stand in for a rest pose (see the module notes)."""
    # Forward kinematics of the scored joints only; the others stay zero and are never read.
    limbs = list(body.legs.values()) + list(body.arms.values())
    scored = sorted({body.pelvis, body.chest} | {j for limb in limbs for j in (limb.root, limb.mid, limb.end)})
    _, gpos = forward_kinematics(motion.skeleton, motion.rotations, motion.root_positions, motion.translations,
                                 joints=scored)
    p = np.zeros((motion.num_frames, motion.skeleton.num_joints, 3))
    p[:, scored] = positions_to_canonical(gpos, convention)
    down = -UP
    cost = _angle_to(p[:, body.chest] - p[:, body.pelvis], UP)
    for leg in body.legs.values():
        cost = cost + _angle_to(p[:, leg.mid] - p[:, leg.root], down)
        cost = cost + _angle_to(p[:, leg.end] - p[:, leg.mid], down)
    fwd = _body_forward(p, body)
    if fwd is not None:
        for arm in body.arms.values():
            for a, b in ((arm.root, arm.mid), (arm.mid, arm.end)):
                d = p[:, b] - p[:, a]
                n = np.maximum(np.linalg.norm(d, axis=-1), 1e-12)
                cost = cost + np.abs(np.arcsin(np.clip(np.sum(d * fwd, axis=-1) / n, -1.0, 1.0)))
    return int(np.argmin(cost))


# ----- bone frames -----------------------------------------------------------------------------------

def bone_frame(direction: np.ndarray, forward: np.ndarray, use_up: bool) -> np.ndarray:
    """(3, 3) rotation whose columns are the bone axis, the secondary axis and their cross product.

    direction: (3,) bone direction (any length > 0); forward: (3,) the character's facing; use_up: take
    canonical up as the secondary axis instead of forward.
    """
    x = direction / np.linalg.norm(direction)
    ref = UP if use_up else forward
    y = ref - np.dot(ref, x) * x
    if np.linalg.norm(y) < 1e-3:
        # The bone runs (nearly) along the reference: take the other one, a well-conditioned choice.
        other = forward if use_up else UP
        y = other - np.dot(other, x) * x
    y = y / np.linalg.norm(y)
    y = y - np.dot(y, x) * x  # a second projection removes the round-off of the first
    y = y / np.linalg.norm(y)
    return np.stack([x, y, np.cross(x, y)], axis=1)


def leg_length(body: BodyLayout, positions: np.ndarray) -> float:
    """Mean over both legs of thigh + shin length (hip to knee, knee to ankle) in the units of
    ``positions`` (J, 3). Independent of the pose, since bones are rigid."""
    return float(np.mean([leg.reach(positions) for leg in body.legs.values()]))


def standing_height(body: BodyLayout, ref: ReferencePose) -> float:
    """Height of the pelvis above the soles with the legs straightened, metres: the drop from the pelvis
    to the hip joints, thigh and shin lengths, and the ankle's height above the lowest point of its foot
    (joints after the ankle and their end sites), each read from the reference pose, mean of both legs.
    Straightening makes it independent of how bent the knees are in that pose."""
    out = []
    for leg in body.legs.values():
        p = ref.positions
        k = leg.joints.index(leg.end)
        foot = list(leg.joints[k:])
        pts = [p[j] for j in foot] + [ref.tips[j] for j in foot if not np.isnan(ref.tips[j]).any()]
        ankle = float(p[leg.end][1] - np.array(pts)[:, 1].min())
        drop = float(p[body.pelvis][1] - p[leg.root][1])
        out.append(drop + np.linalg.norm(p[leg.mid] - p[leg.root]) + np.linalg.norm(p[leg.end] - p[leg.mid])
                   + ankle)
    return float(np.mean(out))


# ----- the plan ---------------------------------------------------------------------------------------

@dataclass(frozen=True)
class Segment:
    """A target bone span whose two ends are mapped: target joint ``start`` to target joint ``end``
    through the unmapped joints ``between`` (parent first); source joints ``source_start`` to
    ``source_end``. weights: (len(between),) arc length of each in-between joint from ``start`` over the
    span's length, in the target's reference pose."""

    source_start: int
    source_end: int
    start: int
    end: int
    between: tuple[int, ...]
    weights: np.ndarray = field(repr=False)


@dataclass(frozen=True, eq=False)
class Alignment:
    """Everything constant needed to carry a clip from the source skeleton to the target skeleton.

    pairs: (P, 2) int, (source joint, target joint), in the target's topological order.
    offsets: (P, 4) the constant Q per pair: G_t = G_s * Q in canonical space.
    segments: spans with both ends mapped, for aim correction and in-between joints.
    followers: unmapped target joints below a mapped joint that keep their reference local rotation.
    fixed: unmapped target joints above every mapped joint (a static reference root, say): they keep
        their reference global rotation.
    target_reference, source_reference: the poses the frames were built from.
    target_local: (Jt, 4) local rotations of the target's reference pose.
    source_root, target_root: the joints carrying root motion (pelvis and its partner).
    root_scale: target metres per source metre for root motion; ground_offset: metres added to the
        scaled pelvis height so that a source standing on the ground puts the target on the ground:
        target standing height minus root_scale times the source's (see standing_height).
    """

    source: Skeleton
    target: Skeleton
    source_convention: Convention
    target_convention: Convention
    pairs: np.ndarray
    offsets: np.ndarray
    segments: tuple[Segment, ...]
    followers: tuple[int, ...]
    fixed: tuple[int, ...]
    source_reference: ReferencePose
    target_reference: ReferencePose
    target_local: np.ndarray
    source_root: int
    target_root: int
    root_scale: float
    ground_offset: float
    source_leg_length: float
    target_leg_length: float


def _check_pairs(pairs, source: Skeleton, target: Skeleton) -> np.ndarray:
    arr = np.asarray(list(pairs), dtype=np.int64).reshape(-1, 2)
    if len(arr) == 0:
        raise MappingError("the mapping has no pairs: nothing to carry over")
    for s, t in arr:
        if not 0 <= s < source.num_joints:
            raise MappingError(f"source joint index {s} is outside the source skeleton", path=source.source)
        if not 0 <= t < target.num_joints:
            raise MappingError(f"target joint index {t} is outside the target skeleton", path=target.source)
    for col, sk, what in ((0, source, "source"), (1, target, "target")):
        vals, counts = np.unique(arr[:, col], return_counts=True)
        if np.any(counts > 1):
            j = int(vals[counts > 1][0])
            raise MappingError(f"{what} joint {sk.names[j]!r} is mapped more than once", path=sk.source)
    return arr[np.argsort(arr[:, 1], kind="stable")]


def _chain_continuation(body: BodyLayout, j: int) -> list[int]:
    """Joints that continue j's chain below it: the rest of its chain, and after the chest the neck."""
    chain = body.chain_of(j)
    if chain is None:
        return []
    after = list(chain.joints[chain.joints.index(j) + 1:])
    if j == body.chest:
        after += list(body.neck)
    return after


def _own_direction(body: BodyLayout, ref: ReferencePose, j: int) -> np.ndarray | None:
    """Direction of joint j's own bone: to the next joint of its chain, else to its end site."""
    nxt = _chain_continuation(body, j)
    if nxt:
        d = ref.positions[nxt[0]] - ref.positions[j]
    elif not np.isnan(ref.tips[j]).any():
        d = ref.tips[j] - ref.positions[j]
    else:
        return None
    return d if np.linalg.norm(d) > 1e-6 else None


def align(source: Skeleton, target: Skeleton, pairs, *,
          source_convention: Convention | None = None, target_convention: Convention | None = None,
          source_motion: Motion | None = None, target_motion: Motion | None = None,
          source_frame: int | None = None, target_frame: int | None = None,
          root_scale: float | None = None, twist: str = "chain",
          source_body: BodyLayout | None = None, target_body: BodyLayout | None = None) -> Alignment:
    """Build the per-joint constants that carry motion from ``source`` to ``target``.

    pairs: iterable of (source joint index, target joint index).
    source_motion / target_motion: clips on the skeletons, read when a rest pose is degenerate (and for
        convention detection); source_frame / target_frame force a reference frame of those clips.
    root_scale: target metres per source metre for root motion; default the ratio of leg lengths.
    twist: how bone frames get their twist: "chain" (default) carries the frame change of the nearest
        mapped ancestor down and adds the shortest swing onto the source bone; "facing" builds every
        frame from the character's forward (up for bones pointing forward). See the module notes.
    Conventions and body layouts are detected when not given.
    """
    if twist not in ("chain", "facing"):
        raise OptionError(f"twist must be 'chain' or 'facing', got {twist!r}")
    pairs = _check_pairs(pairs, source, target)
    sbody = source_body or analyze_body(source, source_motion)
    tbody = target_body or analyze_body(target, target_motion)
    sconv = source_convention or detect_convention(source, source_motion, sbody)
    tconv = target_convention or detect_convention(target, target_motion, tbody)
    sref = reference_pose(source, sconv, sbody, source_motion, source_frame)
    tref = reference_pose(target, tconv, tbody, target_motion, target_frame)

    partner = {int(t): int(s) for s, t in pairs}
    mapped_t = set(partner)
    nt = target.num_joints

    # Segments: from each mapped target joint to the next mapped joint of its chain.
    segments: list[Segment] = []
    seg_of_start: dict[int, Segment] = {}
    in_between: set[int] = set()
    for s, t in pairs:
        s, t = int(s), int(t)
        nxt = [k for k in _chain_continuation(tbody, t) if k in mapped_t]
        if not nxt:
            continue
        b = nxt[0]
        sb = partner[b]
        if not (source.is_ancestor(s, sb) and target.is_ancestor(t, b)):
            continue
        if (np.linalg.norm(sref.positions[sb] - sref.positions[s]) < 1e-6
                or np.linalg.norm(tref.positions[b] - tref.positions[t]) < 1e-6):
            continue  # a zero-length span (joints placed on top of each other) has no direction to aim
        path = []
        k = int(target.parents[b])
        while k != t:
            path.append(k)
            k = int(target.parents[k])
        path.reverse()
        pts = tref.positions[[t] + path + [b]]
        cum = np.concatenate([[0.0], np.cumsum(np.linalg.norm(np.diff(pts, axis=0), axis=1))])
        total = cum[-1]
        weights = cum[1:-1] / total if total > 1e-12 else np.linspace(0, 1, len(path) + 2)[1:-1]
        seg = Segment(s, sb, t, b, tuple(path), weights)
        segments.append(seg)
        seg_of_start[t] = seg
        in_between.update(path)

    # Bone frames and the per-pair constant.
    sfwd, tfwd = sref.forward, tref.forward
    deltas: dict[int, np.ndarray] = {}  # target joint -> F_s F_t^-1 (3x3)
    offsets = np.empty((len(pairs), 4))
    for i, (s, t) in enumerate(pairs):
        s, t = int(s), int(t)
        seg = seg_of_start.get(t)
        if seg is not None:
            ds = sref.positions[seg.source_end] - sref.positions[s]
            dt = tref.positions[seg.end] - tref.positions[t]
        else:
            ds, dt = _own_direction(sbody, sref, s), _own_direction(tbody, tref, t)
        anc = next((a for a in target.ancestors(t) if a in deltas), None)
        have = ds is not None and dt is not None
        if have and (twist == "facing" or anc is None):
            ds_u, dt_u = ds / np.linalg.norm(ds), dt / np.linalg.norm(dt)
            use_up = max(abs(np.dot(ds_u, sfwd)), abs(np.dot(dt_u, tfwd))) > _FORWARD_BONE_COS
            delta = bone_frame(ds, sfwd, use_up) @ bone_frame(dt, tfwd, use_up).T
        elif have:
            # The parent's frame change, then the shortest swing putting the target bone on the source's.
            carried = deltas[anc] @ dt
            delta = quat.to_matrix(quat.between_vectors(carried, ds)) @ deltas[anc]
        elif anc is not None:
            delta = deltas[anc]
        else:
            # No bone and no mapped ancestor: match the two characters' body frames (up, forward).
            delta = bone_frame(UP, sfwd, False) @ bone_frame(UP, tfwd, False).T
        deltas[t] = delta
        dq = quat.from_matrix(delta)
        offsets[i] = quat.multiply(quat.conjugate(sref.rotations[s]), quat.multiply(dq, tref.rotations[t]))

    # Unmapped target joints: in-between (handled by segments), followers, fixed.
    followers, fixed = [], []
    has_mapped_ancestor = np.zeros(nt, dtype=bool)
    for j in range(nt):
        p = int(target.parents[j])
        if p >= 0:
            has_mapped_ancestor[j] = has_mapped_ancestor[p] or p in mapped_t
        if j in mapped_t or j in in_between:
            continue
        (followers if has_mapped_ancestor[j] else fixed).append(j)
    tlocal = np.empty((nt, 4))
    for j in range(nt):
        p = int(target.parents[j])
        tlocal[j] = tref.rotations[j] if p < 0 else quat.multiply(quat.conjugate(tref.rotations[p]),
                                                                  tref.rotations[j])

    # Root motion.
    troot = tbody.pelvis
    sroot = partner.get(troot, sbody.pelvis)
    ls, lt = leg_length(sbody, sref.positions), leg_length(tbody, tref.positions)
    if root_scale is None:
        if ls < 1e-9:
            raise SkeletonError("the source's legs have no length: cannot scale root motion",
                                path=source.source)
        k = lt / ls
    else:
        if not (np.isfinite(root_scale) and root_scale > 0):
            raise OptionError(f"root scale must be a positive number, got {root_scale}")
        k = float(root_scale)
    ground = standing_height(tbody, tref) - k * standing_height(sbody, sref)

    return Alignment(source, target, sconv, tconv, pairs, quat.normalize(offsets), tuple(segments),
                     tuple(followers), tuple(fixed), sref, tref, tlocal, int(sroot), int(troot), float(k),
                     float(ground), ls, lt)
