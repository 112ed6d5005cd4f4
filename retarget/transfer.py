"""Rotation transfer, in-between joints, aim correction and root motion, over whole clips at once.

Given an Alignment (align.py), every frame is carried from the source to the target in four steps, each
vectorised over frames (Python loops run over joints only):

1. mapped joints: G_t = C_s * G_s_file * Q (one 4x4 product per joint: both constants fold into one
   linear map of the quaternion's components);
2. unmapped joints between two mapped ones of a chain: the world rotation deltas from the reference pose
   of the two ends, G * G_ref^-1, are slerped with the joint's arc-length weight and applied to its
   reference rotation;
3. aim correction: for every span with both ends mapped, the shortest rotation taking the target span
   (start joint to end joint, through the in-between joints) onto the source span's direction is applied
   to the start joint and the in-between joints. A shortest-arc turn keeps the twist about the bone, and
   the span then points where the source's does even when the chains have different joint counts;
4. everything else below a mapped joint keeps its reference local rotation (follows its parent); joints
   above every mapped joint keep their reference global rotation.

Root motion: the source pelvis position in canonical metres, scaled by the root scale about the ground
plane (canonical y = 0, taken as the floor as capture files commonly have it), raised by the alignment's
ground offset, and put on the target's pelvis.
"""

from __future__ import annotations

import numpy as np

from . import quat
from .align import UP, Alignment, file_to_canonical_rotation
from .motion import Motion

__all__ = ["transfer", "transfer_world", "remove_travel", "right_product", "left_product"]


def right_product(c: np.ndarray) -> np.ndarray:
    """(4, 4) M with q @ M == quat.multiply(q, c) for any q (..., 4): right multiplication by a constant."""
    return quat.multiply(np.eye(4), np.asarray(c, dtype=np.float64)[None, :])


def left_product(c: np.ndarray) -> np.ndarray:
    """(4, 4) M with q @ M == quat.multiply(c, q) for any q (..., 4): left multiplication by a constant."""
    return quat.multiply(np.asarray(c, dtype=np.float64)[None, :], np.eye(4))


def _closure(skeleton, joints) -> list[int]:
    """Joints and all their ancestors, in topological order."""
    keep = set()
    for j in joints:
        j = int(j)
        while j >= 0 and j not in keep:
            keep.add(j)
            j = int(skeleton.parents[j])
    return sorted(keep)


def _source_world(motion: Motion, rot_joints, pos_joints) -> tuple[dict, dict]:
    """File-space global rotations {j: (F, 4)} and positions {j: (F, 3)} of the joints asked for (and
    their ancestors), by forward kinematics over all frames at once."""
    sk = motion.skeleton
    rots: dict[int, np.ndarray] = {}
    pos: dict[int, np.ndarray] = {}
    need_pos = set(_closure(sk, pos_joints))
    tr = motion.translations
    for j in _closure(sk, list(rot_joints) + list(pos_joints)):
        p = int(sk.parents[j])
        if p < 0:
            rots[j] = motion.rotations[:, j]
            if j in need_pos:
                pos[j] = motion.root_positions
            continue
        rots[j] = quat.multiply(rots[p], motion.rotations[:, j])
        if j in need_pos:
            off = sk.offsets[j] if tr is None else tr[:, j]
            pos[j] = pos[p] + quat.rotate(rots[p], off)
    return rots, pos


def remove_travel(path: np.ndarray, fps: float, seconds: float = 1.0) -> np.ndarray:
    """Horizontal travel taken out of a canonical root path (F, 3): the centred moving average of x and z
    over ``seconds`` is subtracted, so the root sways about the origin but no longer travels; y is kept."""
    f = path.shape[0]
    out = np.array(path, dtype=np.float64, copy=True)
    if f == 0:
        return out
    w = max(1, min(f, int(round(seconds * fps))))
    w -= (w + 1) % 2 if w > 1 else 0  # odd window, centred
    half = w // 2
    xz = out[:, [0, 2]]
    padded = np.concatenate([np.repeat(xz[:1], half, axis=0), xz, np.repeat(xz[-1:], half, axis=0)])
    c = np.concatenate([np.zeros((1, 2)), np.cumsum(padded, axis=0)])
    mean = (c[w:] - c[:-w]) / w
    out[:, [0, 2]] = xz - mean
    return out


def transfer_world(motion: Motion, alignment: Alignment, in_place: bool = False
                   ) -> tuple[np.ndarray, np.ndarray, dict]:
    """Target global rotations and pelvis path in canonical space.

    motion: a clip on alignment.source. Returns (rotations (F, Jt, 4) canonical globals, pelvis (F, 3)
    canonical metres of alignment.target_root, source_world) where source_world holds the canonical
    source positions {joint: (F, 3)} used for aiming, for reports.
    """
    al = alignment
    src, tgt = al.source, al.target
    f = motion.num_frames
    nt = tgt.num_joints
    qs = file_to_canonical_rotation(al.source_convention)
    cs = al.source_convention.file_to_canonical()
    ss = al.source_convention.scale

    seg_pos_joints = {j for sg in al.segments for j in (sg.source_start, sg.source_end)}
    srot, spos = _source_world(motion, al.pairs[:, 0], seg_pos_joints | {al.source_root})
    source_world = {j: ss * (p @ cs.T) for j, p in spos.items() if j in seg_pos_joints | {al.source_root}}

    g: list[np.ndarray | None] = [None] * nt
    lq = left_product(qs)
    for (s, t), q in zip(al.pairs, al.offsets):
        g[int(t)] = srot[int(s)] @ (lq @ right_product(q))

    ref = al.target_reference.rotations
    offs = tgt.offsets
    for sg in al.segments:
        if sg.between:
            da = quat.multiply(g[sg.start], quat.conjugate(ref[sg.start]))
            db = quat.multiply(g[sg.end], quat.conjugate(ref[sg.end]))
            for k, w in zip(sg.between, sg.weights):
                g[k] = quat.slerp(da, db, np.full(f, w)) @ right_product(ref[k])
        chain = (sg.start,) + sg.between
        nxt = sg.between + (sg.end,)
        vt = np.zeros((f, 3))
        for k, c in zip(chain, nxt):
            vt += quat.rotate(g[k], offs[c])
        vs = source_world[sg.source_end] - source_world[sg.source_start]
        aim = quat.between_vectors(vt, vs)
        for k in chain:
            g[k] = quat.multiply(aim, g[k])

    followers = set(al.followers)
    for j in range(nt):
        if g[j] is not None:
            continue
        if j in followers:
            g[j] = g[int(tgt.parents[j])] @ right_product(al.target_local[j])
        else:
            g[j] = np.broadcast_to(ref[j], (f, 4))
    rotations = np.stack(g, axis=1)

    pelvis = al.root_scale * source_world[al.source_root] + al.ground_offset * UP
    if in_place:
        pelvis = remove_travel(pelvis, motion.fps)
    return rotations, pelvis, source_world


def transfer(motion: Motion, alignment: Alignment, in_place: bool = False) -> Motion:
    """Carry a clip on alignment.source onto alignment.target.

    Returns a Motion on the target skeleton (its names, offsets and channel layout) in the target's file
    axes and units, at the source's frame rate. in_place: take the horizontal root travel out.
    """
    al = alignment
    tgt = al.target
    f, nt = motion.num_frames, tgt.num_joints
    grot, pelvis, _ = transfer_world(motion, al, in_place)

    # Local rotations: the change of axes cancels between parent and child, only the root keeps it.
    qt_inv = quat.conjugate(file_to_canonical_rotation(al.target_convention))
    local = np.empty((f, nt, 4))
    local[:, 0] = grot[:, 0] @ left_product(qt_inv)
    for j in range(1, nt):
        local[:, j] = quat.multiply(quat.conjugate(grot[:, int(tgt.parents[j])]), grot[:, j])

    ct = al.target_convention.file_to_canonical()
    st = al.target_convention.scale
    m = al.target_root
    translations = None
    ref_pos = al.target_reference.positions
    if m == 0:
        root = pelvis
    else:
        path = [m] + tgt.ancestors(m)
        path.reverse()  # root ... m
        if tgt.has_position_channels(m) and all(g_is_fixed(al, k) for k in path[:-1]):
            # The pelvis has its own position channels under a static root: move the pelvis, keep the root.
            root = np.broadcast_to(ref_pos[0], (f, 3))
            parent_pos = np.broadcast_to(ref_pos[path[-2]], (f, 3))
            world = (pelvis - parent_pos) / st  # canonical axes, target units
            local_t = quat.rotate(quat.conjugate(grot[:, path[-2]]), world)
            translations = motion_translations(tgt, f)
            translations[:, m] = local_t
        else:
            # Place the root so that the pelvis lands on its path.
            root = np.array(pelvis)
            for a, c in zip(path[:-1], path[1:]):
                root -= st * quat.rotate(grot[:, a], tgt.offsets[c])
    root_file = (np.asarray(root) @ ct) / st
    if translations is not None:
        translations[:, 0] = root_file
    return Motion(tgt, local, root_file, motion.fps, translations, source=motion.source)


def g_is_fixed(al: Alignment, j: int) -> bool:
    return j in al.fixed


def motion_translations(skeleton, frames: int) -> np.ndarray:
    """(F, J, 3) rest offsets on every frame."""
    return np.broadcast_to(skeleton.offsets, (frames, skeleton.num_joints, 3)).copy()
