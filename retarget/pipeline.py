"""One clip end to end: read, match (when no mapping is given), align, transfer, contacts, report.

    result = retarget_clip("take.bvh", "rig.bvh")            # auto-matched
    result = retarget_clip(clip, rig, "rig.mapping.yaml", in_place=True, fps=30)
    write_motion("out.bvh", result.motion)

The report says how faithfully the target follows the source: for every mapped joint whose bone span
has both ends mapped, the angle between the target span and the source span on every frame (the pose
fidelity), and how far aim correction had to turn the joint away from the plain rotation transfer.
"""

from __future__ import annotations

import os
from dataclasses import dataclass
from typing import Any, Literal

import numpy as np
from pydantic import BaseModel, ConfigDict, Field

from .align import Alignment, align
from .chains import analyze_body
from .contacts import ContactReport, plant_feet
from .convention import Convention, detect_convention
from .errors import MappingError, OptionError, options_from
from .motion import Motion
from .skeleton import Skeleton
from .timing import frame_range, resample
from .transfer import transfer

__all__ = ["RetargetOptions", "JointFidelity", "SideInfo", "RetargetReport", "Result", "retarget_clip"]

# A span pointing further than this from the source on some frame earns a warning (common practice:
# a few degrees are invisible on a character, ten are not).
_WARN_DEG = 10.0


class RetargetOptions(BaseModel):
    """What a user can choose for one clip (all optional)."""

    model_config = ConfigDict(extra="forbid", frozen=True)

    in_place: bool = False
    root_scale: float | None = Field(default=None, gt=0)
    source_up: str | None = None
    source_forward: str | None = None
    source_unit_scale: float | None = Field(default=None, gt=0)
    rig_up: str | None = None
    rig_forward: str | None = None
    rig_unit_scale: float | None = Field(default=None, gt=0)
    frames: tuple[int | None, int | None] | None = None
    fps: float | None = Field(default=None, gt=0)
    reference_frame: int | None = Field(default=None, ge=0)
    twist: Literal["chain", "facing"] = "chain"
    contact_fix: bool = True
    contact_settings: dict | None = None


class JointFidelity(BaseModel):
    """How one mapped target joint follows its source joint, in degrees over the clip.

    span_end: the next mapped joint of its chain (the bone span aimed); direction_error: angle between the
    target span and the source span; aim_correction: how far the joint was turned from the plain
    rotation transfer to aim its span; between_bend: how far the unmapped joints inside the span were
    bent to aim it (the joint itself is then left as transferred)."""

    target: str
    source: str
    span_end: str | None = None
    direction_error_mean_deg: float | None = None
    direction_error_max_deg: float | None = None
    aim_correction_mean_deg: float = 0.0
    aim_correction_max_deg: float = 0.0
    between_bend_mean_deg: float | None = None
    between_bend_max_deg: float | None = None


class SideInfo(BaseModel):
    """One skeleton's convention and the pose its bone frames were built from."""

    file: str | None
    joints: int
    up: str
    forward: str
    units: str
    metres_per_unit: float | None
    reference_pose: str
    leg_length_m: float


class RetargetReport(BaseModel):
    """What happened to one clip and how faithful the result is."""

    source: SideInfo
    target: SideInfo
    frames: int
    fps: float
    source_frames: tuple[int, int]
    source_fps: float
    pairs: int
    unmapped_target: list[str]
    unmapped_source: list[str]
    root_scale: float
    ground_offset_m: float
    in_place: bool
    contact_fix: str
    contacts: ContactReport | None = None
    joints: list[JointFidelity]
    direction_error_mean_deg: float | None
    direction_error_max_deg: float | None
    warnings: list[str]


@dataclass(frozen=True)
class Result:
    """motion: the clip on the rig; mapping: the Mapping used (matched, loaded or given); report: a
    RetargetReport; contacts: the FootContacts found on the source (frames of the source selection)."""

    motion: Motion
    mapping: Any
    report: RetargetReport
    contacts: Any = None


# ----- inputs -----------------------------------------------------------------------------------------

def _as_motion(obj, what: str) -> Motion:
    from .io import read_motion

    if isinstance(obj, Motion):
        return obj
    if isinstance(obj, Skeleton):
        return Motion.rest(obj)
    if isinstance(obj, (str, os.PathLike)):
        return read_motion(obj)
    raise OptionError(f"{what} must be a Motion, a Skeleton or a file path, got {type(obj).__name__}")


def _options(options: dict) -> RetargetOptions:
    return options_from(RetargetOptions, options, "option")


def _joint_name(value, skeleton: Skeleton, entry: int, side: str) -> str:
    """A joint given by name or index, checked against the skeleton."""
    if isinstance(value, str):
        return value
    try:
        index = int(value)
    except (TypeError, ValueError):
        raise MappingError(f"mapping entry {entry}: {side} joint must be a name or an index, got {value!r}") \
            from None
    if not 0 <= index < skeleton.num_joints:
        raise MappingError(f"mapping entry {entry}: {side} joint index {index} is outside 0..{skeleton.num_joints - 1}")
    return skeleton.names[index]


def _mapping_for(mapping, source: Skeleton, target: Skeleton, smotion: Motion, tmotion: Motion | None,
                 bodies: tuple = (None, None)):
    """The Mapping to use and its (source index, target index) pairs.

    mapping: None (matched now), a Mapping, a mapping file, or (source, target) pairs of joint names or
    indices (taken as given, confidence 1). bodies: the two skeletons' analyze_body results, if known."""
    from .mapping import JointPair, Mapping, load_mapping
    from .match import match

    if mapping is None:
        m = match(source, target, source_motion=smotion, target_motion=tmotion, source_body=bodies[0],
                  target_body=bodies[1])
    elif isinstance(mapping, (str, os.PathLike)):
        m = load_mapping(mapping, source, target)
    elif isinstance(mapping, Mapping):
        m = mapping
    else:
        items = []
        if isinstance(mapping, dict):
            mapping = list(mapping.items())
        for k, item in enumerate(mapping):
            try:
                s, t = item[0], item[1]
            except (TypeError, IndexError, KeyError):
                raise MappingError(f"mapping entry {k}: expected a (source, target) pair, got {item!r}") from None
            s, t = (_joint_name(v, sk, k, side) for v, sk, side in ((s, source, "source"), (t, target, "target")))
            items.append(JointPair(source=s, target=t, confidence=1.0, reason="given"))
        m = Mapping(pairs=items, source_file=source.source, target_file=target.source)
    return m, m.index_pairs(source, target)


# ----- report -----------------------------------------------------------------------------------------

def _span_directions(motion: Motion, starts: list[int], ends: list[int], conv: Convention) -> np.ndarray:
    """(S, 3, F) unit directions, canonical space, from each start joint to its end joint."""
    from .motion import forward_kinematics

    joints = sorted(set(starts) | set(ends))
    col = {j: i for i, j in enumerate(joints)}
    _, pos = forward_kinematics(motion.skeleton, motion.rotations, motion.root_positions,
                                motion.translations, joints=joints)
    pos = pos.transpose(1, 2, 0)  # (J, 3, F): contiguous rows, as forward kinematics builds them
    d = pos[[col[e] for e in ends]] - pos[[col[s] for s in starts]]
    d = np.einsum("ik,skf->sif", conv.file_to_canonical(), d)  # directions need the axes, not the units
    return d / np.maximum(np.sqrt(np.einsum("skf,skf->sf", d, d)), 1e-12)[:, None]


def _fidelity(al: Alignment, checks: dict, result: Motion) -> list[JointFidelity]:
    """Per mapped joint: the angle between its bone span in the finished clip (after the contact fix, from
    its own forward kinematics) and the source's span in canonical space; and how far aim correction
    turned the joint and bent the joints inside its span (transfer's per-span checks), all in degrees.
    result has the frames transfer was given."""
    spans = {sgm.start: sgm for sgm in al.segments if sgm.source_start != sgm.source_end}
    measured = [t for t in spans if t in checks]
    angle: dict[int, np.ndarray] = {}
    if measured:
        # The source spans' directions come from transfer, which aimed at them; the result's are read
        # back from its own forward kinematics, after the contact fix.
        dt = _span_directions(result, measured, [spans[t].end for t in measured], al.target_convention)
        for i, t in enumerate(measured):
            cos = np.clip(np.einsum("kf,kf->f", checks[t][2], dt[i]), -1.0, 1.0)
            angle[t] = np.degrees(np.arccos(cos))
    rows = []
    for s, t in al.pairs:
        s, t = int(s), int(t)
        row = JointFidelity(target=al.target.names[t], source=al.source.names[s])
        if t in angle:
            err = angle[t]
            row.span_end = al.target.names[spans[t].end]
            row.direction_error_mean_deg = round(float(err.mean()), 4)
            row.direction_error_max_deg = round(float(err.max()), 4)
        if t in checks and len(checks[t][0]):
            turned, bent = np.degrees(checks[t][0]), np.degrees(checks[t][1])
            row.aim_correction_mean_deg = round(float(turned.mean()), 4)
            row.aim_correction_max_deg = round(float(turned.max()), 4)
            if t in spans and spans[t].between:
                row.between_bend_mean_deg = round(float(bent.mean()), 4)
                row.between_bend_max_deg = round(float(bent.max()), 4)
        rows.append(row)
    return rows


def _side(sk: Skeleton, conv: Convention, ref: str, leg: float) -> SideInfo:
    return SideInfo(file=sk.source, joints=sk.num_joints, up=conv.up, forward=conv.forward, units=conv.units,
                    metres_per_unit=conv.metres_per_unit, reference_pose=ref, leg_length_m=round(leg, 6))


def _all_finite(a: np.ndarray) -> bool:
    """Every value finite: one sum (finite unless something is not, or it overflows), then the exact
    check only when it is not."""
    return bool(np.isfinite(np.add.reduce(a, axis=None))) or bool(np.all(np.isfinite(a)))


# ----- the pipeline -----------------------------------------------------------------------------------

def retarget_clip(clip, rig, mapping=None, **options) -> Result:
    """Put one clip onto a rig.

    clip: a Motion or a clip file. rig: a Skeleton, a Motion (its skeleton is the rig; its frames are
        read only when its rest pose is degenerate) or a rig file (BVH: its zero pose is the rest pose).
    mapping: None (matched automatically), a Mapping, a mapping file (YAML), or (source, target) pairs
        of joint names or indices.
    options (see RetargetOptions): in_place, root_scale (target metres per source metre), source_up /
        source_forward / source_unit_scale and rig_up / rig_forward / rig_unit_scale (convention
        overrides), frames=(start, stop) (0-based, stop excluded), fps (resample the output),
        reference_frame (source frame whose pose stands for its rest pose), twist ("chain" or
        "facing", see align.align), contact_fix.
    Returns Result(motion on the rig in its own axes, units and channel layout, mapping, report).
    """
    opts = _options(options)
    source_full = _as_motion(clip, "clip")
    rig_motion = _as_motion(rig, "rig")
    source, target = source_full.skeleton, rig_motion.skeleton
    warnings: list[str] = []

    sbody = analyze_body(source, source_full)
    tbody = analyze_body(target, rig_motion)
    sconv = detect_convention(source, source_full, sbody).with_overrides(
        opts.source_up, opts.source_forward, opts.source_unit_scale)
    tconv = detect_convention(target, rig_motion, tbody).with_overrides(
        opts.rig_up, opts.rig_forward, opts.rig_unit_scale)

    used_mapping, pairs = _mapping_for(mapping, source, target, source_full, rig_motion, (sbody, tbody))

    motion = source_full
    first = 0
    if opts.frames is not None:
        first, stop = frame_range(source_full, *opts.frames)
        motion = source_full.slice(first, stop)

    al = align(source, target, pairs, source_convention=sconv, target_convention=tconv,
               source_motion=source_full, target_motion=rig_motion if rig_motion.num_frames else None,
               source_frame=opts.reference_frame, root_scale=opts.root_scale, twist=opts.twist,
               source_body=sbody, target_body=tbody)
    checks: dict = {}
    out = transfer(motion, al, in_place=opts.in_place, checks=checks)

    # Foot contacts: detected on the source, carried to the rig's feet, locked there (or only measured).
    # In place, a planted foot should slide back with the removed travel (a treadmill), so locking it
    # in the world would undo the stride: contacts are then only measured.
    fix = opts.contact_fix and not opts.in_place
    out, contact_report, found = plant_feet(motion, sbody.legs, sconv, out, tbody.legs, tconv,
                                        settings=opts.contact_settings, fix=fix)
    if fix:
        contact_note = "applied"
    elif opts.contact_fix:
        contact_note = "not applied: the clip is in place (measured only)"
        warnings.append("in place: feet are not locked, they slide back with the removed travel")
    else:
        contact_note = "not applied: switched off (measured only)"

    joints = _fidelity(al, checks, out)
    if opts.fps is not None:
        out = resample(out, opts.fps)

    # Warnings a technical animator would want to see.
    for conv, side, sk in ((sconv, "source", source), (tconv, "rig", target)):
        if conv.metres_per_unit is None:
            warnings.append(f"{side} units unknown: assumed a {conv.scale * (conv.height or 0):.2f} m figure "
                            f"(give --{side}-unit-scale); root motion follows the leg ratio either way")
        if conv.forward_confidence == 0.0:
            warnings.append(f"could not tell which way the {side} faces; assumed {conv.forward} "
                            f"(give --{side}-forward)")
    if al.source_reference.label != "rest":
        why = "given" if opts.reference_frame is not None else "its rest pose has every bone along one line"
        warnings.append(f"source bone frames read from {al.source_reference.label} ({why})")
    low = used_mapping.low_confidence()
    if low:
        shown = ", ".join(f"{p.source}->{p.target} ({p.confidence:.2f})" for p in low[:5])
        more = f" and {len(low) - 5} more" if len(low) > 5 else ""
        warnings.append(f"{len(low)} mapped pair(s) have low confidence, worth a look: {shown}{more}")
    mapped_t = {t for _, t in pairs}
    for kind in ("legs", "arms"):
        for side, limb in getattr(tbody, kind).items():
            missing = [target.names[j] for j in (limb.root, limb.mid, limb.end) if j not in mapped_t]
            if missing:
                warnings.append(f"rig {side} {kind[:-1]} joints not mapped: {', '.join(missing)}")
    if tbody.pelvis not in mapped_t:
        warnings.append(f"rig pelvis {target.names[tbody.pelvis]!r} is not mapped; root motion follows the "
                        f"source pelvis {source.names[sbody.pelvis]!r}")
    for row in joints:
        if row.direction_error_max_deg is not None and row.direction_error_max_deg > _WARN_DEG:
            warnings.append(f"{row.target} points up to {row.direction_error_max_deg:.1f} deg away from "
                            f"{row.source}")
    if not (_all_finite(out.rotations) and _all_finite(out.root_positions)):
        raise OptionError("the result has non-finite values; check the mapping and conventions",
                          path=source_full.source)

    errs_mean = [r.direction_error_mean_deg for r in joints if r.direction_error_mean_deg is not None]
    errs_max = [r.direction_error_max_deg for r in joints if r.direction_error_max_deg is not None]
    mapped_s = {s for s, _ in pairs}
    report = RetargetReport(
        source=_side(source, sconv, al.source_reference.label, al.source_leg_length),
        target=_side(target, tconv, al.target_reference.label, al.target_leg_length),
        frames=out.num_frames, fps=out.fps, source_frames=(first, first + motion.num_frames),
        source_fps=source_full.fps, pairs=len(pairs),
        unmapped_target=[n for j, n in enumerate(target.names) if j not in mapped_t],
        unmapped_source=[n for j, n in enumerate(source.names) if j not in mapped_s],
        root_scale=round(al.root_scale, 6), ground_offset_m=round(al.ground_offset, 6), in_place=opts.in_place,
        contact_fix=contact_note, contacts=contact_report, joints=joints,
        direction_error_mean_deg=round(float(np.mean(errs_mean)), 4) if errs_mean else None,
        direction_error_max_deg=round(float(np.max(errs_max)), 4) if errs_max else None,
        warnings=warnings)
    return Result(out, used_mapping, report, found)
