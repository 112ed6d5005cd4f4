"""A summary of one file's skeleton and clip: what `retarget inspect` shows."""

from __future__ import annotations

import numpy as np
from pydantic import BaseModel

from .chains import BodyLayout, analyze_body, still_joints
from .convention import Convention, detect_convention
from .errors import SkeletonError
from .motion import Motion

__all__ = ["JointInfo", "ChainInfo", "ConventionInfo", "ClipSummary", "summarize", "rest_pose_kind"]


class JointInfo(BaseModel):
    name: str
    parent: str | None
    depth: int
    channels: list[str]
    offset: list[float]
    animated: bool


class ChainInfo(BaseModel):
    kind: str
    side: str
    joints: list[str]


class ConventionInfo(BaseModel):
    up: str
    up_confidence: float
    forward: str
    forward_confidence: float
    forward_evidence: str
    units: str
    metres_per_unit: float | None
    height_file_units: float | None
    reference_pose: str


class ClipSummary(BaseModel):
    """What a technical animator wants to know about a file before using it."""

    file: str | None
    joint_count: int
    end_sites: int
    frames: int
    fps: float
    duration_s: float
    rest_pose: str
    arm_angle_deg: float | None
    convention: ConventionInfo
    joints: list[JointInfo]
    chains: list[ChainInfo]
    static_joints: list[str]
    layout_problem: str | None = None


def rest_pose_kind(body: BodyLayout) -> tuple[str, float | None]:
    """"T-pose", "A-pose" or "other" from the upper arms' elevation in the reference pose.

    Elevation within 20 degrees of horizontal reads as a T-pose, 20-70 degrees down as an A-pose (common
    practice: A-poses are modelled with the arms 30-60 degrees down)."""
    if body.reference != "rest":
        return "other (degenerate: bones along one axis)", None
    angles = []
    for limb in body.arms.values():
        d = body.positions[limb.mid] - body.positions[limb.root]
        n = np.linalg.norm(d)
        if n < 1e-12:
            continue
        angles.append(np.degrees(np.arcsin(np.clip(np.dot(d / n, body.up), -1, 1))))
    if not angles:
        return "other", None
    a = float(np.mean(angles))
    if abs(a) <= 20:
        return "T-pose", a
    if -70 <= a < -20:
        return "A-pose", a
    return "other", a


def summarize(motion: Motion, convention: Convention | None = None) -> ClipSummary:
    """Summarise a clip or rig file: hierarchy, chains, convention, rest-pose kind, static joints."""
    sk = motion.skeleton
    try:
        body = analyze_body(sk, motion)
    except SkeletonError as exc:
        body, problem = None, exc.detail
    else:
        problem = None
    if body is not None:
        conv = convention or detect_convention(sk, motion, body)
        kind, arm = rest_pose_kind(body)
        chains = [ChainInfo(kind=c.kind, side=c.side, joints=[sk.names[j] for j in c.joints])
                  for c in body.chains]
        reference = body.reference
    else:
        pos = sk.rest_global[1]
        conv = convention or Convention("+Y", "+Z", None, "unknown", 0.0, 0.0, "none",
                                        float(np.ptp(pos[:, 1])))
        kind, arm, chains, reference = "other (no body layout)", None, [], "rest"
    flags = body.still if body is not None else still_joints(motion)
    still = set() if flags is None else {int(j) for j in np.flatnonzero(flags)}
    joints = [JointInfo(name=sk.names[j], parent=None if sk.parents[j] < 0 else sk.names[sk.parents[j]],
                        depth=int(sk.depths[j]), channels=list(sk.channels[j]),
                        offset=[float(v) for v in sk.offsets[j]], animated=j not in still)
              for j in range(sk.num_joints)]
    return ClipSummary(
        file=motion.source, joint_count=sk.num_joints, end_sites=int((~np.isnan(sk.tips).any(axis=1)).sum()),
        frames=motion.num_frames, fps=motion.fps, duration_s=motion.duration, rest_pose=kind,
        arm_angle_deg=None if arm is None else round(arm, 1),
        convention=ConventionInfo(up=conv.up, up_confidence=round(conv.up_confidence, 3), forward=conv.forward,
                                  forward_confidence=round(conv.forward_confidence, 3),
                                  forward_evidence=conv.forward_evidence, units=conv.units,
                                  metres_per_unit=conv.metres_per_unit, height_file_units=conv.height,
                                  reference_pose=reference),
        joints=joints, chains=chains, static_joints=[sk.names[j] for j in sorted(still)], layout_problem=problem)
