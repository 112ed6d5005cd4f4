"""Foot contacts: find them on a source clip, hold them on a target clip, measure what is left.

Everything is worked out in the canonical space (+Y up, metres; see convention.py) and scaled by leg
length (hip to knee plus knee to ankle in the rest pose), so one set of thresholds serves a 1.2 m
character and a 2 m one, a clip in centimetres and one in metres.

A foot is seen through two points: the ankle and the toe (the toe joint's end site, else the toe joint,
else the ankle's end site). The ankle sits a fixed distance above the sole when the foot is flat, the
"flat offset", read from the rest pose when it stands, else from the clip's level, planted frames. The
foot's sole height is then min(ankle height - flat offset, toe height): the heel while the toes are up, the toes while the
heel is up. The pivot of a foot on a frame is whichever of the two is lower; a planted foot keeps its
pivot still, it may roll from heel to toe.

Detection (detect_contacts): a foot is in contact while it is slow (the slower of its two points), its
sole is not moving up or down, and it is close to the support it stands on, each test with hysteresis
between an enter and an exit threshold; a contact that passes ends where the foot last met every enter
threshold, and its ends are then grown back over the frames that the smoothing of the speeds took off
a sharp take-off or landing (where the unsmoothed foot has not moved yet). The support is measured per
stretch of stillness, not as one floor for the clip, so a step onto a box or uneven ground gives each
contact its own level. A still foot far above the other foot is held in the air, and a foot bending
down with hips that fall like a thrown body is at the top of a jump: both are dropped. Short gaps are
closed and short contacts removed.

Fixing (fix_contacts): the flags come from the source; the target's support for each contact is the
source's support carried over (height above the source's ground, scaled by the ratio of leg lengths,
over the target's ground). Each contact is locked where the target's pivot is at the contact's middle
frames: the foot is moved as a rigid body (its global orientation kept) so that its pivot stops sliding
and it stands on the support, never under it. The move eases in and out over a few frames around the contact. The
legs follow by two-bone IK (hip, knee, ankle; the knee turns in its current bend plane), with an
allowance before full extension; where a leg still cannot reach, the root is lowered smoothly. Frames
outside contacts and their blend windows are left exactly as they were.

Metrics (measure_contacts): skate is the horizontal displacement of the pivot from one contact frame to
the next (of the slower of heel and toe when the two are level), penetration the depth of the sole
under the support on contact frames, and the height-weighted foot skate of Zhang, Starke, Komura and
Saito (2018) is v * (2 - 2^(h/H)) for h < H, over every frame. All include capture jitter: they are
frame-to-frame figures.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import NamedTuple

import numpy as np
from pydantic import BaseModel, ConfigDict, Field, model_validator

from . import quat
from .errors import RetargetError, SkeletonError, options_from

__all__ = [
    "ContactSettings",
    "FootContacts",
    "FootMetrics",
    "FootContactReport",
    "ContactReport",
    "IKSolution",
    "two_bone_ik",
    "detect_contacts",
    "contacts_from_flags",
    "carry_contacts",
    "fix_contacts",
    "plant_feet",
    "measure_contacts",
    "contact_report",
    "contact_runs",
    "ContactSpan",
    "FootSummary",
    "ContactSummary",
    "summarize_contacts",
]


# ----- options -----------------------------------------------------------------------------------------

class ContactSettings(BaseModel):
    """Options for contact detection and fixing. Lengths are in leg lengths (L, hip to ankle along the
    bones), times in seconds, so the defaults hold for any figure size and frame rate.

    Where each default comes from:
    - height_enter / height_exit 0.04 L / 0.08 L (about 3.5 / 7 cm on a 0.86 m leg): common practice
      puts a contact threshold a few centimetres above the support, above capture noise (a few mm).
      Two thresholds (hysteresis) keep noise from toggling the state.
    - speed_enter / speed_exit 0.5 L/s / 0.8 L/s (about 0.43 / 0.69 m/s), on the slower of heel and toe:
      common practice; a swinging foot moves at several m/s, while real stance feet on retargeted
      captures slide at 0.15-0.27 m/s (the real clips in this project's test data), which must still count
      as contact, so this bound is loose.
    - climb_enter / climb_exit 0.2 L/s / 0.4 L/s, on the sole's vertical speed: our choice, tuned on the
      demo takes; it separates a low, slow step (a turn on the spot lifts the toes about 5 cm at under
      0.6 m/s) from a sliding stance, which moves along the ground, not up and down.
    - smoothing 0.1 s: the window of the Savitzky-Golay derivative for speeds (common practice; removes
      the millimetre jitter of optical capture, which in the real clips at 120 fps reads as tenths of m/s
      when differenced frame to frame).
    - min_duration 0.07 s and max_gap 0.07 s: common practice; a running stance lasts about 0.2 s, the
      shortest real contact, and flicker is shorter than a couple of frames at 30 fps.
    - max_step 0.5 L (about 0.43 m): a still foot higher than this above the other foot is held up, not
      standing. Stair risers are about 0.18 m and step-up boxes 0.2-0.4 m (recalled, common practice).
    - blend 0.1 s: ease-in and ease-out window around each contact (common practice: a few frames).
    - reach 0.985: share of full leg extension IK may use beyond what the clip already uses, so knees do
      not snap straight (common practice; 0.985 keeps about 20 degrees of knee bend, where a small
      change of reach no longer swings the knee by many degrees a frame).
    - max_root_drop 0.3 L: the most the root is lowered to let a leg reach (our choice).
    - skate_height 0.025 m: H in the height-weighted skate of Zhang, Starke, Komura and Saito (2018),
      value recalled from memory.
    - ground: the target's ground height in canonical metres; None estimates it from the target clip.
    """

    model_config = ConfigDict(extra="forbid", frozen=True)

    height_enter: float = Field(0.04, gt=0, description="enter contact below this sole height over the support, L")
    height_exit: float = Field(0.08, gt=0, description="leave contact above this sole height over the support, L")
    speed_enter: float = Field(0.5, gt=0, description="enter contact below this foot speed, L per second")
    speed_exit: float = Field(0.8, gt=0, description="leave contact above this foot speed, L per second")
    climb_enter: float = Field(0.2, gt=0, description="enter contact below this vertical sole speed, L per second")
    climb_exit: float = Field(0.4, gt=0, description="leave contact above this vertical sole speed, L per second")
    smoothing: float = Field(0.1, ge=0, description="speed smoothing window, seconds")
    min_duration: float = Field(0.07, ge=0, description="shortest contact kept, seconds")
    max_gap: float = Field(0.07, ge=0, description="longest gap closed between two contacts, seconds")
    max_step: float = Field(0.5, gt=0, description="highest support above the other foot, L")
    blend: float = Field(0.1, ge=0, description="ease-in and ease-out window around a contact, seconds")
    reach: float = Field(0.985, gt=0.5, le=1.0, description="share of full leg extension IK may use")
    max_root_drop: float = Field(0.3, ge=0, description="most the root may be lowered, L")
    skate_height: float = Field(0.025, gt=0, description="H of the height-weighted skate, metres")
    ground: float | None = Field(None, description="target ground height, canonical metres (None: estimate)")

    @model_validator(mode="after")
    def _ordered(self) -> "ContactSettings":
        if self.height_exit < self.height_enter:
            raise ValueError(f"height_exit ({self.height_exit}) must not be below height_enter ({self.height_enter})")
        if self.speed_exit < self.speed_enter:
            raise ValueError(f"speed_exit ({self.speed_exit}) must not be below speed_enter ({self.speed_enter})")
        if self.climb_exit < self.climb_enter:
            raise ValueError(f"climb_exit ({self.climb_exit}) must not be below climb_enter ({self.climb_enter})")
        return self

    def frames(self, seconds: float, fps: float, least: int = 1) -> int:
        """A duration in whole frames, at least ``least``."""
        return max(least, int(round(seconds * fps)))


def _settings(settings: ContactSettings | dict | None) -> ContactSettings:
    if settings is None:
        return ContactSettings()
    if isinstance(settings, ContactSettings):
        return settings
    return options_from(ContactSettings, settings, "contact option")


# ----- data --------------------------------------------------------------------------------------------

def _frozen(a, dtype=np.float64) -> np.ndarray:
    a = np.array(a, dtype=dtype, copy=True)
    a.setflags(write=False)
    return a


@dataclass(frozen=True, eq=False)
class FootContacts:
    """Contact flags of a clip's feet.

    feet: foot names, e.g. ("left", "right"), the keys of the legs they were found on.
    flags: (F, K) bool, True where foot k is planted on frame f.
    support: (F, K) support height under the foot, canonical metres (+Y up), NaN outside contacts.
    fps: frame rate of the clip.
    leg_length: (K,) leg length of each foot's leg in metres (hip to knee plus knee to ankle, rest pose).
    ground: the lowest support of the clip, canonical metres (NaN without contacts).
    """

    feet: tuple[str, ...]
    flags: np.ndarray
    support: np.ndarray
    fps: float
    leg_length: np.ndarray
    ground: float = float("nan")

    def __post_init__(self) -> None:
        flags = np.asarray(self.flags, dtype=bool)
        k = len(self.feet)
        if flags.ndim != 2 or flags.shape[1] != k:
            raise RetargetError(f"contact flags have shape {flags.shape}, expected (frames, {k})")
        support = np.asarray(self.support, dtype=np.float64)
        if support.shape != flags.shape:
            raise RetargetError(f"support has shape {support.shape}, expected {flags.shape}")
        object.__setattr__(self, "feet", tuple(self.feet))
        object.__setattr__(self, "flags", _frozen(flags, bool))
        object.__setattr__(self, "support", _frozen(support))
        object.__setattr__(self, "leg_length", _frozen(np.broadcast_to(self.leg_length, (k,))))
        object.__setattr__(self, "fps", float(self.fps))
        object.__setattr__(self, "ground", float(self.ground))

    @property
    def num_frames(self) -> int:
        return self.flags.shape[0]

    def segments(self, foot: int | str) -> list[tuple[int, int]]:
        """Contacts of one foot as (start, stop) frame ranges, stop exclusive."""
        k = self.feet.index(foot) if isinstance(foot, str) else int(foot)
        starts, stops = contact_runs(self.flags[:, k])
        return list(zip(starts.tolist(), stops.tolist()))


@dataclass(frozen=True, eq=False)
class FootMetrics:
    """Per-frame contact quality of a clip's feet, against a FootContacts on the same frames.

    skate: (F, K) horizontal displacement of the pivot from frame f-1 to f (of the slower of heel and
        toe when both are level), metres, NaN unless the foot is in contact on both frames.
    penetration: (F, K) depth of the sole under the support, metres (>= 0), NaN outside contacts.
    weighted_skate: (F, K) height-weighted pivot speed v * (2 - 2^(h/H)) for h < H, else 0, m/s, on
        every frame (the first frame is 0); NaN when the clip has no contact to measure height from.
    sole: (F, K) sole height, canonical metres.
    leg_length: (K,) metres; fps; skate_height: H in metres.
    """

    feet: tuple[str, ...]
    flags: np.ndarray
    skate: np.ndarray
    penetration: np.ndarray
    weighted_skate: np.ndarray
    sole: np.ndarray
    leg_length: np.ndarray
    fps: float
    skate_height: float

    def summary(self, k: int | None = None) -> dict[str, float | int]:
        """Mean and peak figures of one foot (index k) or of all feet (k None)."""
        sel = slice(None) if k is None else slice(k, k + 1)
        flags = self.flags[:, sel]
        skate = self.skate[:, sel]
        leg = self.leg_length[sel]
        pen = self.penetration[:, sel]
        ws = self.weighted_skate[:, sel]
        measured = np.isfinite(skate)
        skate_l = skate / leg[None, :]
        out: dict[str, float | int] = {
            "contact_frames": int(flags.sum()),
            "contacts": int(sum(len(contact_runs(flags[:, i])[0]) for i in range(flags.shape[1]))),
            "share": float(flags.mean()) if flags.size else 0.0,
        }
        if measured.any():
            out["skate_leg_per_frame"] = float(np.mean(skate_l[measured]))
            out["skate_leg_per_frame_p95"] = float(np.percentile(skate_l[measured], 95))
            out["skate_cm_s"] = float(np.mean(skate[measured]) * self.fps * 100.0)
        else:
            out["skate_leg_per_frame"] = out["skate_leg_per_frame_p95"] = out["skate_cm_s"] = 0.0
        if flags.any():
            out["penetration_max_cm"] = float(np.nanmax(pen[flags]) * 100.0)
            out["penetration_mean_cm"] = float(np.nanmean(pen[flags]) * 100.0)
        else:
            out["penetration_max_cm"] = out["penetration_mean_cm"] = 0.0
        out["weighted_skate_cm_s"] = float(np.mean(ws) * 100.0) if np.isfinite(ws).all() and ws.size else float("nan")
        return out


def contact_runs(mask: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Runs of True in a 1-D mask: (starts, stops), stop exclusive."""
    m = np.asarray(mask, dtype=bool)
    d = np.diff(np.concatenate([[0], m.view(np.int8), [0]]).astype(np.int8))
    return np.flatnonzero(d == 1), np.flatnonzero(d == -1)


# ----- reports (read by people) --------------------------------------------------------------------------

class FootContactReport(BaseModel):
    """Contact figures of one foot (or of all feet, foot "all"), before and after fixing."""

    model_config = ConfigDict(extra="forbid")

    foot: str
    contacts: int = Field(description="number of contacts")
    contact_frames: int = Field(description="frames in contact")
    share: float = Field(description="share of the clip's frames in contact")
    skate_before_leg_per_frame: float = Field(description="mean pivot slide per contact frame, leg lengths")
    skate_after_leg_per_frame: float | None = None
    skate_before_cm_s: float = Field(description="mean pivot slide during contact, cm per second")
    skate_after_cm_s: float | None = None
    penetration_before_cm: float = Field(description="deepest sole under the support during contact, cm")
    penetration_after_cm: float | None = None
    weighted_skate_before_cm_s: float | None = Field(
        None, description="height-weighted skate over all frames, cm per second (Zhang et al. 2018)")
    weighted_skate_after_cm_s: float | None = None
    frames_changed: int = 0


class ContactReport(BaseModel):
    """Foot contacts of one clip: per foot and overall, before and (when fixed) after."""

    model_config = ConfigDict(extra="forbid")

    fixed: bool = Field(description="whether the contact fix ran")
    frames: int
    fps: float
    skate_height_cm: float = Field(description="H of the height-weighted skate, cm")
    root_lowered_max_cm: float = 0.0
    frames_changed: int = 0
    feet: list[FootContactReport]
    overall: FootContactReport


def _finite(x: float) -> float | None:
    return None if x is None or not np.isfinite(x) else float(x)


def contact_report(before: FootMetrics, after: FootMetrics | None = None,
                   changed: np.ndarray | None = None, root_drop: float = 0.0) -> ContactReport:
    """Summarise metrics into a ContactReport.

    before/after: FootMetrics of the clip before and after fixing (after None when not fixed);
    changed: (F, K) bool, frames where each leg was changed; root_drop: largest root lowering, metres.
    """
    f, k = before.flags.shape
    changed = np.zeros((f, k), dtype=bool) if changed is None else np.asarray(changed, dtype=bool)

    def one(name: str, idx: int | None) -> FootContactReport:
        b = before.summary(idx)
        a = after.summary(idx) if after is not None else None
        ch = changed[:, idx] if idx is not None else changed.any(axis=1)
        return FootContactReport(
            foot=name, contacts=b["contacts"], contact_frames=b["contact_frames"], share=b["share"],
            skate_before_leg_per_frame=b["skate_leg_per_frame"], skate_before_cm_s=b["skate_cm_s"],
            penetration_before_cm=b["penetration_max_cm"],
            weighted_skate_before_cm_s=_finite(b["weighted_skate_cm_s"]),
            skate_after_leg_per_frame=None if a is None else a["skate_leg_per_frame"],
            skate_after_cm_s=None if a is None else a["skate_cm_s"],
            penetration_after_cm=None if a is None else a["penetration_max_cm"],
            weighted_skate_after_cm_s=None if a is None else _finite(a["weighted_skate_cm_s"]),
            frames_changed=int(ch.sum()))

    feet = [one(name, i) for i, name in enumerate(before.feet)]
    return ContactReport(fixed=after is not None, frames=f, fps=before.fps,
                         skate_height_cm=before.skate_height * 100.0, root_lowered_max_cm=root_drop * 100.0,
                         frames_changed=int(changed.any(axis=1).sum()), feet=feet, overall=one("all", None))


# ----- small signal helpers (all vectorised over frames) ---------------------------------------------

def _hysteresis(x: np.ndarray, enter: float, leave: float) -> np.ndarray:
    """(F,) bool: True from where x drops below ``enter`` until it rises above ``leave``.

    Frames before the first crossing take the state the first crossing leaves (below ``leave`` before
    a leaving crossing counts as in). NaN counts as above ``leave``."""
    x = np.where(np.isfinite(x), x, np.inf)
    n = x.shape[0]
    event = np.zeros(n, dtype=np.int8)
    event[x < enter] = 1
    event[x > leave] = -1
    idx = np.where(event != 0, np.arange(n), -1)
    last = np.maximum.accumulate(idx) if n else idx
    state = np.zeros(n, dtype=bool)
    has = last >= 0
    state[has] = event[last[has]] == 1
    if n and not has.all():
        nz = np.flatnonzero(event)
        first = event[nz[0]] if nz.size else 0
        state[~has] = (first == -1) if nz.size else bool(np.all(x < leave))
    return state


def _close_gaps(mask: np.ndarray, max_gap: int) -> np.ndarray:
    """Fill runs of False no longer than max_gap that lie between two runs of True."""
    out = mask.copy()
    starts, stops = contact_runs(~mask)
    for s, e in zip(starts, stops):
        if s > 0 and e < mask.shape[0] and e - s <= max_gap:
            out[s:e] = True
    return out


def _drop_short(mask: np.ndarray, min_len: int) -> np.ndarray:
    out = mask.copy()
    starts, stops = contact_runs(mask)
    for s, e in zip(starts, stops):
        if e - s < min_len:
            out[s:e] = False
    return out


def _ease(u: np.ndarray) -> np.ndarray:
    """Smoothstep 3u^2 - 2u^3 on [0, 1]: zero slope at both ends."""
    u = np.clip(u, 0.0, 1.0)
    return u * u * (3.0 - 2.0 * u)


def _window(count: int, frames: int) -> int:
    """An odd window length of about ``frames`` that fits in ``count`` samples (0 when none fits)."""
    w = max(3, int(frames) | 1)
    if w > count:
        w = count if count % 2 else count - 1
    return w if w >= 3 else 0


def _savgol(p: np.ndarray, window: int, deriv: int) -> np.ndarray:
    """Savitzky-Golay filter along axis 0 over an odd ``window`` (>= 3, at most the length): each sample
    becomes the value (deriv 0) or the slope per sample (deriv 1) of the least-squares polynomial of
    degree min(2, window - 1) through the window centred on it; the first and last window // 2 samples
    read the polynomial fitted to the first or last ``window`` samples. The same filter as
    scipy.signal.savgol_filter(..., mode="interp"), in numpy so the command line need not load scipy."""
    p = np.asarray(p, dtype=np.float64)
    n, half = p.shape[0], window // 2
    powers = np.arange(min(2, window - 1) + 1)

    def rows(at: np.ndarray) -> np.ndarray:  # value or slope of each power at the positions ``at``
        if deriv == 0:
            return at[:, None] ** powers
        return powers * at[:, None] ** np.maximum(powers - 1, 0)

    # Centred windows: one weight per tap, from the fit over positions -half .. half.
    taps = rows(np.zeros(1)) @ np.linalg.pinv((np.arange(window) - half)[:, None] ** powers)
    out = np.empty_like(p)
    inner = out[half: n - half]
    np.multiply(p[: n - window + 1], taps[0, 0], out=inner)
    for i in range(1, window):
        inner += taps[0, i] * p[i: n - window + 1 + i]
    # Ends: the fit over the first (last) window samples, at positions 0 .. window - 1.
    fit = np.linalg.pinv(np.arange(window, dtype=np.float64)[:, None] ** powers)
    head = rows(np.arange(half, dtype=np.float64)) @ fit
    tail = rows(np.arange(window - half, window, dtype=np.float64)) @ fit
    out[:half] = np.tensordot(head, p[:window], axes=1)
    out[n - half:] = np.tensordot(tail, p[n - window:], axes=1)
    return out


def _velocity(p: np.ndarray, fps: float, window: int) -> np.ndarray:
    """Time derivative along axis 0 (per second), Savitzky-Golay over ``window`` frames (quadratic fit)."""
    n = p.shape[0]
    w = _window(n, window)
    if w == 0:
        return np.zeros_like(p)
    return _savgol(p, w, 1) * fps


def _smooth(p: np.ndarray, window: int) -> np.ndarray:
    w = _window(p.shape[0], window)
    if w == 0:
        return np.array(p, dtype=np.float64)
    return _savgol(p, w, 0)


# ----- foot geometry -----------------------------------------------------------------------------------

@dataclass(frozen=True, eq=False)
class _Feet:
    """A clip's legs in canonical space: (F, K, 3) hip, knee, ankle, toe; flat offsets to come."""

    names: tuple[str, ...]
    hip: np.ndarray
    knee: np.ndarray
    ankle: np.ndarray
    toe: np.ndarray
    has_toe: np.ndarray
    leg_length: np.ndarray
    fps: float
    grot: "np.ndarray | _JointColumns" = field(repr=False)   # indexed [frames, joint]
    gpos: "np.ndarray | _JointColumns" = field(repr=False)
    to_canonical: np.ndarray = field(repr=False)
    scale: float = 1.0
    rest_flat: np.ndarray = field(default=None, repr=False)  # type: ignore[assignment]


def _tip(skeleton, j: int) -> np.ndarray | None:
    t = skeleton.tips[j]
    if np.all(np.isfinite(t)) and np.linalg.norm(t) > 1e-9 * max(1.0, float(np.abs(skeleton.offsets).max())):
        return t
    return None


def _check_legs(skeleton, legs: dict, feet: tuple[str, ...] | None = None) -> tuple[str, ...]:
    if not legs:
        raise SkeletonError("no legs to find foot contacts on", path=skeleton.source)
    names = tuple(legs) if feet is None else tuple(feet)
    for name in names:
        if name not in legs:
            raise SkeletonError(f"foot {name!r} has no leg on this skeleton (legs: {', '.join(legs)})",
                                path=skeleton.source)
        leg = legs[name]
        for role in ("root", "mid", "end"):
            j = getattr(leg, role)
            if not 0 <= j < skeleton.num_joints:
                raise SkeletonError(f"leg {name!r}: {role} joint index {j} is outside the skeleton",
                                    path=skeleton.source)
        if not (skeleton.is_ancestor(leg.root, leg.mid) and skeleton.is_ancestor(leg.mid, leg.end)):
            raise SkeletonError(f"leg {name!r}: {skeleton.names[leg.root]!r} > {skeleton.names[leg.mid]!r} > "
                                f"{skeleton.names[leg.end]!r} is not a chain of ancestors", path=skeleton.source)
    return names


def _leg_length(skeleton, leg, scale: float) -> float:
    length = leg.reach(np.asarray(skeleton.rest_global[1])) * scale
    if not length > 0:
        raise SkeletonError(f"leg at {skeleton.names[leg.root]!r} has zero length in the rest pose",
                            path=skeleton.source)
    return float(length)


class _JointColumns:
    """Global transforms computed for some joints only, indexed like the full (F, J, n) array:
    ``cols[frames, joint]``."""

    def __init__(self, data: np.ndarray, joints: list[int]) -> None:
        self.data = data
        self.col = {j: i for i, j in enumerate(joints)}

    def __getitem__(self, key):
        frames, joint = key
        return self.data[frames, self.col[int(joint)]]


def _leg_transforms(motion, legs: dict, names: tuple[str, ...]) -> tuple[_JointColumns, _JointColumns]:
    """Forward kinematics of the joints the legs need (their joints, toes and the parents of the three
    leg joints, with their ancestors), not of the whole skeleton."""
    from .motion import forward_kinematics

    sk = motion.skeleton
    need: list[int] = []
    for name in names:
        leg = legs[name]
        for j in (leg.root, leg.mid, leg.end, leg.toe):
            if j is None:
                continue
            for k in (int(j), int(sk.parents[j])):
                if k >= 0 and k not in need:
                    need.append(k)
    grot, gpos = forward_kinematics(sk, motion.rotations, motion.root_positions, motion.translations,
                                    joints=need)
    return _JointColumns(grot, need), _JointColumns(gpos, need)


def _feet(motion, legs: dict, convention, feet: tuple[str, ...] | None = None,
          transforms: tuple[np.ndarray, np.ndarray] | None = None) -> _Feet:
    sk = motion.skeleton
    names = _check_legs(sk, legs, feet)
    grot, gpos = _leg_transforms(motion, legs, names) if transforms is None else transforms
    c = np.asarray(convention.file_to_canonical(), dtype=np.float64)
    s = float(convention.scale)

    def canon(p: np.ndarray) -> np.ndarray:
        return (p @ c.T) * s

    hip, knee, ankle, toe, has_toe, length, rest_flat = [], [], [], [], [], [], []
    for name in names:
        leg = legs[name]
        rest_flat.append(_rest_flat(sk, leg, c, s))
        hip.append(canon(gpos[:, leg.root]))
        knee.append(canon(gpos[:, leg.mid]))
        ankle.append(canon(gpos[:, leg.end]))
        point = None
        if leg.toe is not None:
            t = _tip(sk, leg.toe)
            point = gpos[:, leg.toe] if t is None else gpos[:, leg.toe] + quat.rotate(grot[:, leg.toe], t)
        else:
            t = _tip(sk, leg.end)
            if t is not None:
                point = gpos[:, leg.end] + quat.rotate(grot[:, leg.end], t)
        has_toe.append(point is not None)
        toe.append(canon(point) if point is not None else ankle[-1])
        length.append(_leg_length(sk, leg, s))
    stack = lambda xs: np.stack(xs, axis=1)  # noqa: E731
    return _Feet(names, stack(hip), stack(knee), stack(ankle), stack(toe), np.array(has_toe),
                 np.array(length), motion.fps, grot, gpos, c, s, np.array(rest_flat))


def _toe_rest(skeleton, leg) -> np.ndarray | None:
    """Rest position (file space) of the foot's toe point, or None."""
    rot, pos = skeleton.rest_global
    if leg.toe is not None:
        t = _tip(skeleton, leg.toe)
        return pos[leg.toe] if t is None else pos[leg.toe] + quat.rotate(rot[leg.toe], t)
    t = _tip(skeleton, leg.end)
    return None if t is None else pos[leg.end] + quat.rotate(rot[leg.end], t)


def _rest_flat(skeleton, leg, to_canonical: np.ndarray, scale: float) -> float:
    """Height of the ankle over the toe point in the rest pose, metres, when the rest pose stands (leg
    hanging within 18 degrees of straight down, foot within 45 degrees of level); NaN otherwise (a
    degenerate or sitting rest pose): then the clip decides."""
    pos = np.asarray(skeleton.rest_global[1])
    toe = _toe_rest(skeleton, leg)
    if toe is None:
        return 0.0
    hip, ankle, toe = ((p @ to_canonical.T) * scale for p in (pos[leg.root], pos[leg.end], toe))
    leg_dir, ln = _unit(ankle - hip)
    foot_dir, fn = _unit(toe - ankle)
    if ln < 1e-9 or fn < 1e-9 or -leg_dir[1] < np.cos(np.radians(18)) or abs(foot_dir[1]) > np.sin(np.radians(45)):
        return float("nan")
    return float(ankle[1] - toe[1])


def _flat_offset(ft: _Feet, pick: np.ndarray) -> np.ndarray:
    """(K,) height of the ankle over the toe point when the foot is flat, metres.

    From the rest pose when it stands; otherwise the median of (ankle height - toe height) over the
    ``pick`` frames ((F, K) bool: frames where the foot is planted and neither point moves up or down),
    or over every frame when fewer than three are picked."""
    k = ft.ankle.shape[1]
    out = np.zeros(k)
    diff = ft.ankle[..., 1] - ft.toe[..., 1]
    for i in range(k):
        if not ft.has_toe[i]:
            continue
        if np.isfinite(ft.rest_flat[i]):
            out[i] = ft.rest_flat[i]
            continue
        sel = pick[:, i] if pick[:, i].sum() >= 3 else np.ones(diff.shape[0], dtype=bool)
        out[i] = float(np.median(diff[sel, i]))
    return out


def _level_frames(ft: _Feet, flags: np.ndarray | None, st: "ContactSettings") -> np.ndarray:
    """(F, K) frames to read the flat offset from: in contact (or, with no flags, slow) and with both
    heel and toe moving up or down slower than climb_enter."""
    win = st.frames(st.smoothing, ft.fps, 3)
    va = _velocity(ft.ankle, ft.fps, win)
    vt = _velocity(ft.toe, ft.fps, win)
    leg = ft.leg_length[None, :]
    level = np.maximum(np.abs(va[..., 1]), np.abs(vt[..., 1])) / leg < st.climb_enter
    if flags is None:
        slow = np.minimum(np.linalg.norm(va, axis=-1), np.linalg.norm(vt, axis=-1)) / leg < st.speed_enter
        return level & slow
    return level & flags


class _Sole(NamedTuple):
    height: np.ndarray      # (F, K) sole height, metres
    on_heel: np.ndarray     # (F, K) bool: the pivot is the heel (under the ankle), else the toe


def _sole(ft: _Feet, flat: np.ndarray) -> _Sole:
    heel = ft.ankle[..., 1] - flat[None, :]
    toe = ft.toe[..., 1]
    on_heel = heel <= toe
    return _Sole(np.where(on_heel, heel, toe), on_heel)


def _pivot_step(sole: _Sole, ft: _Feet, flat: np.ndarray) -> np.ndarray:
    """(F, K, 3) displacement from frame f-1 to f of the point that is the pivot on frame f
    (row 0 is zero)."""
    heel = ft.ankle - flat[None, :, None] * np.array([0.0, 1.0, 0.0])
    step_heel = np.zeros_like(heel)
    step_toe = np.zeros_like(heel)
    step_heel[1:] = heel[1:] - heel[:-1]
    step_toe[1:] = ft.toe[1:] - ft.toe[:-1]
    return np.where(sole.on_heel[..., None], step_heel, step_toe)


# ----- detection -----------------------------------------------------------------------------------------

def _segment_support(sole: np.ndarray, mask: np.ndarray, q: float) -> np.ndarray:
    """(F,) per frame of each run of ``mask``: the q-th percentile of ``sole`` over that run, NaN outside."""
    out = np.full(sole.shape[0], np.nan)
    for s, e in zip(*contact_runs(mask)):
        out[s:e] = np.percentile(sole[s:e], q)
    return out


def detect_contacts(motion, legs: dict, convention, settings: ContactSettings | dict | None = None) -> FootContacts:
    """Find the frames where each foot is planted.

    motion: any clip (usually the source capture); legs: {"left": Limb, "right": Limb} from
    analyze_body; convention: the clip's Convention (up axis, metres per unit).
    Returns FootContacts with flags (F, K) and per-contact support heights in canonical metres.
    """
    st = _settings(settings)
    ft = _feet(motion, legs, convention)
    f, k = ft.ankle.shape[:2]
    fps = motion.fps
    leg = ft.leg_length
    win = st.frames(st.smoothing, fps, 3)

    va = np.linalg.norm(_velocity(ft.ankle, fps, win), axis=-1)
    vt = np.linalg.norm(_velocity(ft.toe, fps, win), axis=-1)
    speed = np.minimum(va, vt) / leg[None, :]
    flat = _flat_offset(ft, _level_frames(ft, None, st))
    sole = _sole(ft, flat).height
    sole_s = _smooth(sole, win)

    climb = np.abs(_velocity(sole, fps, win)) / leg[None, :]
    flags = np.zeros((f, k), dtype=bool)
    for i in range(k):
        still = _hysteresis(speed[:, i], st.speed_enter, st.speed_exit)
        still &= _hysteresis(climb[:, i], st.climb_enter, st.climb_exit)
        still = _close_gaps(still, st.frames(st.max_gap, fps, 0))
        level = _segment_support(sole_s[:, i], still, 25)
        over = (sole_s[:, i] - level) / leg[i]
        flags[:, i] = still & _hysteresis(over, st.height_enter, st.height_exit)
        # Hysteresis decides whether a contact is real; it ends where the foot last met every enter
        # threshold, not where it finally passed an exit threshold.
        calm = (speed[:, i] < st.speed_enter) & (climb[:, i] < st.climb_enter) & (over < st.height_enter)
        for s, e in zip(*contact_runs(flags[:, i])):
            last = np.flatnonzero(calm[s:e])
            flags[s + (last[-1] + 1 if last.size else 0):e, i] = False

    # A foot still far above the other foot is held up, not standing on something; a foot whose height
    # bends down like a thrown body's (the top of a jump, where everything is slow for a moment) is
    # flying, not standing.
    pelvis = _smooth(ft.hip[..., 1].mean(axis=1), win)
    for i in range(k):
        others = np.delete(sole_s, i, axis=1).min(axis=1) if k > 1 else None
        for s, e in zip(*contact_runs(flags[:, i])):
            level = np.median(sole_s[s:e, i])
            if others is not None and level - others[s:e].min() > st.max_step * leg[i]:
                flags[s:e, i] = False
            elif _falling(sole_s[s:e, i], pelvis[s:e], fps):
                flags[s:e, i] = False

    gap = st.frames(st.max_gap, fps, 0)
    shortest = st.frames(st.min_duration, fps, 1)
    for i in range(k):
        flags[:, i] = _drop_short(_close_gaps(flags[:, i], gap), shortest)

    # The smoothed speeds smear a sharp take-off or landing over half a window either side, so a
    # contact found on them can start a few frames late and end a few frames early. Each contact's ends
    # are grown back, by at most that half window, over the frames the foot still has not left: its
    # unsmoothed step into the frame (at the end; out of the frame, at the start) is slower than
    # _EDGE_SHARE of the enter thresholds and its sole is low.
    into = np.zeros((f, k))
    into[1:] = np.minimum(np.linalg.norm(np.diff(ft.ankle, axis=0), axis=-1),
                          np.linalg.norm(np.diff(ft.toe, axis=0), axis=-1)) * fps / leg[None, :]
    rise = np.zeros((f, k))
    rise[1:] = np.abs(np.diff(sole, axis=0)) * fps / leg[None, :]
    still_into = (into < _EDGE_SHARE * st.speed_enter) & (rise < _EDGE_SHARE * st.climb_enter)
    still_out = np.zeros_like(still_into)
    still_out[:-1] = still_into[1:]
    for i in range(k):
        flags[:, i] = _grow_runs(flags[:, i], still_out[:, i], still_into[:, i], sole[:, i],
                                 st.height_enter * leg[i], win // 2)
    return _with_support(ft.names, flags, sole, fps, leg)


def _grow_runs(mask: np.ndarray, before: np.ndarray, after: np.ndarray, sole: np.ndarray, height: float,
               limit: int) -> np.ndarray:
    """Each run of ``mask`` ((F,) bool) extended by up to ``limit`` frames: backwards over consecutive
    ``before`` frames, forwards over consecutive ``after`` frames, as long as the ``sole`` is less than
    ``height`` over the run's support."""
    out = mask.copy()
    if limit <= 0:
        return out
    n = mask.shape[0]
    for s, e in zip(*contact_runs(mask)):
        level = _support_level(sole[s:e])
        lo, hi = max(0, s - limit), min(n, e + limit)
        bad = np.flatnonzero(~(before[lo:s] & (sole[lo:s] - level < height)))
        start = lo + (bad[-1] + 1 if bad.size else 0)
        bad = np.flatnonzero(~(after[e:hi] & (sole[e:hi] - level < height)))
        stop = e + (bad[0] if bad.size else hi - e)
        out[start:stop] = True
    return out


# A contact's support is this low percentile of the sole's height over the contact's middle frames: the
# ground is under the foot, and noise goes both ways (common practice).
_SUPPORT_PERCENTILE = 10.0

GRAVITY = 9.80665  # m/s^2, standard gravity

# A contact's ends are grown over frames whose unsmoothed step (of the slower of heel and toe, and of the
# sole up or down) is below this share of the enter thresholds (see detect_contacts): 0.125 L/s with the
# default speed_enter, about 1 mm a frame at 120 fps on a 0.86 m leg, where a foot has not yet left.
# Our choice, tuned on the demo takes: it restores the frames that smoothing takes off a sharp take-off
# or landing (up to 4 at 120 fps on the jump) while a foot that starts its swing slowly gains at most a
# frame or two. Frame-to-frame capture jitter above it simply stops the growth.
_EDGE_SHARE = 0.25


def _falling(sole: np.ndarray, pelvis: np.ndarray, fps: float) -> bool:
    """True when, over a stretch of frames, the hips fall like a thrown body (their height bends down
    with at least half of gravity's curvature) and the foot bends down with them (at least a quarter):
    the top of a jump, where every point is slow for a moment. A planted foot's height does not bend
    down, however the body moves above it. sole, pelvis: (n,) heights in metres."""
    n = sole.shape[0]
    if n < 5:
        return False
    t = (np.arange(n) - 0.5 * (n - 1)) / fps
    foot = 2.0 * np.polyfit(t, sole, 2)[0]
    hips = 2.0 * np.polyfit(t, pelvis, 2)[0]
    return bool(foot < -0.25 * GRAVITY and hips < -0.5 * GRAVITY)


def _with_support(feet, flags: np.ndarray, sole: np.ndarray, fps: float, leg: np.ndarray) -> FootContacts:
    support = np.full(flags.shape, np.nan)
    for i in range(flags.shape[1]):
        for s, e in zip(*contact_runs(flags[:, i])):
            support[s:e, i] = _support_level(sole[s:e, i])
    ground = float(np.nanmin(support)) if flags.any() else float("nan")
    return FootContacts(tuple(feet), flags, support, fps, leg, ground)


def contacts_from_flags(motion, legs: dict, convention, flags: np.ndarray,
                        feet: tuple[str, ...] = ("left", "right"),
                        settings: ContactSettings | dict | None = None) -> FootContacts:
    """FootContacts from given flags ((F, K) bool, e.g. hand-made or ground truth) with each contact's
    support measured on the clip (a low percentile of the sole height over the contact)."""
    st = _settings(settings)
    flags = np.asarray(flags, dtype=bool)
    if flags.shape != (motion.num_frames, len(feet)):
        raise RetargetError(f"contact flags have shape {flags.shape}, expected ({motion.num_frames}, {len(feet)})",
                            path=motion.source)
    ft = _feet(motion, legs, convention, tuple(feet))
    flat = _flat_offset(ft, _level_frames(ft, flags, st))
    return _with_support(ft.names, flags, _sole(ft, flat).height, motion.fps, ft.leg_length)


# ----- carrying contacts to another clip ------------------------------------------------------------------

def _middle(s: int, e: int) -> slice:
    """The middle frames of a contact: all but the first and last fifth."""
    n = e - s
    cut = n // 5
    return slice(s + cut, e - cut)


def _support_level(sole: np.ndarray) -> float:
    """The support under one contact from its sole heights ((n,) metres): a low percentile over the
    middle frames (the ends, where the foot lands and leaves, depend on where exactly the contact is cut)."""
    n = sole.shape[0]
    return float(np.percentile(sole[_middle(0, n)], _SUPPORT_PERCENTILE))


def _carry(contacts: FootContacts, ft: _Feet, sole: np.ndarray, st: ContactSettings) -> FootContacts:
    flags = np.asarray(contacts.flags)
    f, k = flags.shape
    if not flags.any():
        return FootContacts(ft.names, flags, np.full((f, k), np.nan), ft.fps, ft.leg_length, float("nan"))
    src_leg = float(np.mean(contacts.leg_length))
    ratio = float(np.mean(ft.leg_length)) / src_leg if src_leg > 0 else 1.0
    ground_src = contacts.ground if np.isfinite(contacts.ground) else float(np.nanmin(contacts.support))
    rel_list, meas_list, weight = [], [], []
    runs = []
    for i in range(k):
        for s, e in zip(*contact_runs(flags[:, i])):
            src = contacts.support[s:e, i]
            rel = float(np.nanmedian(src)) - ground_src if np.isfinite(src).any() else 0.0
            runs.append((i, s, e, rel))
            rel_list.append(rel * ratio)
            meas_list.append(_support_level(sole[s:e, i]))
            weight.append(e - s)
    if st.ground is not None:
        ground = float(st.ground)
    else:
        # The offset that best lays the source's levels over where the target's feet are: a
        # frame-weighted median of (measured level - carried height above ground) over every contact.
        est = np.array(meas_list) - np.array(rel_list)
        order = np.argsort(est)
        cw = np.cumsum(np.array(weight)[order])
        ground = float(est[order][np.searchsorted(cw, 0.5 * cw[-1])])
    support = np.full((f, k), np.nan)
    for (i, s, e, rel) in runs:
        support[s:e, i] = ground + rel * ratio
    return FootContacts(ft.names, flags, support, ft.fps, ft.leg_length, ground)


def carry_contacts(contacts: FootContacts, motion, legs: dict, convention,
                   settings: ContactSettings | dict | None = None) -> FootContacts:
    """The source's contacts on a target clip of the same frames: same flags, supports re-levelled.

    Each contact's support becomes the target's ground plus the source support's height above the
    source's ground, scaled by the ratio of leg lengths. The target's ground is settings.ground when
    set, else the offset that best lays these levels over where the target's soles stand in each
    contact (a frame-weighted median).
    """
    return _on_target(motion, legs, contacts, convention, _settings(settings))[3]


def _on_target(motion, legs: dict, contacts: FootContacts, convention, st: ContactSettings):
    """The target's feet, ground offset and soles, and the source's contacts carried onto them:
    (feet, flat, sole, carried contacts)."""
    _check_frames(contacts, motion)
    ft = _feet(motion, legs, convention, contacts.feet)
    flat = _flat_offset(ft, _level_frames(ft, np.asarray(contacts.flags), st))
    sole = _sole(ft, flat)
    return ft, flat, sole, _carry(contacts, ft, sole.height, st)


def _check_frames(contacts: FootContacts, motion) -> None:
    if contacts.num_frames != motion.num_frames:
        raise RetargetError(f"contact flags cover {contacts.num_frames} frames but the clip has "
                            f"{motion.num_frames}", path=motion.source)


# ----- metrics -------------------------------------------------------------------------------------------

def _fill_nearest(values: np.ndarray, mask: np.ndarray) -> np.ndarray:
    """(F,) values on ``mask`` frames spread to every frame from the nearest masked frame in time."""
    idx = np.flatnonzero(mask)
    n = values.shape[0]
    if idx.size == 0:
        return np.full(n, np.nan)
    pos = np.searchsorted(idx, np.arange(n))
    left = idx[np.clip(pos - 1, 0, idx.size - 1)]
    right = idx[np.clip(pos, 0, idx.size - 1)]
    frames = np.arange(n)
    nearest = np.where(np.abs(frames - left) <= np.abs(right - frames), left, right)
    return values[nearest]


_TIE = 0.01  # heel and toe within this many leg lengths of each other count as level (common practice)


def _measure(ft: _Feet, flat: np.ndarray, contacts: FootContacts, skate_height: float) -> FootMetrics:
    flags = np.asarray(contacts.flags)
    f, k = flags.shape
    sole = _sole(ft, flat)
    step = _pivot_step(sole, ft, flat)
    horiz = np.linalg.norm(step[..., [0, 2]], axis=-1)
    # Heel and toe at about the same height (foot flat): the foot slides only as much as the slower.
    heel_step = np.zeros((f, k))
    toe_step = np.zeros((f, k))
    heel_step[1:] = np.linalg.norm(np.diff(ft.ankle[..., [0, 2]], axis=0), axis=-1)
    toe_step[1:] = np.linalg.norm(np.diff(ft.toe[..., [0, 2]], axis=0), axis=-1)
    tie = np.abs((ft.ankle[..., 1] - flat[None, :]) - ft.toe[..., 1]) < _TIE * ft.leg_length[None, :]
    horiz = np.where(tie, np.minimum(heel_step, toe_step), horiz)
    both = np.zeros_like(flags)
    both[1:] = flags[1:] & flags[:-1]
    skate = np.where(both, horiz, np.nan)
    pen = np.where(flags, np.maximum(0.0, contacts.support - sole.height), np.nan)
    # Height over the nearest support in time (the nearest contact of this foot; of any foot when this
    # one never touches down).
    any_level = np.nanmin(np.where(flags, contacts.support, np.inf), axis=1)
    ws = np.full((f, k), np.nan)
    for i in range(k):
        if flags[:, i].any():
            level = _fill_nearest(np.asarray(contacts.support[:, i]), flags[:, i])
        elif flags.any():
            level = _fill_nearest(any_level, flags.any(axis=1))
        else:
            continue
        h = np.maximum(sole.height[:, i] - level, 0.0)
        weight = np.where(h < skate_height, 2.0 - np.power(2.0, h / skate_height), 0.0)
        ws[:, i] = horiz[:, i] * ft.fps * weight
        ws[0, i] = 0.0
    return FootMetrics(ft.names, flags, skate, pen, ws, sole.height, ft.leg_length, ft.fps, skate_height)


def measure_contacts(motion, legs: dict, contacts: FootContacts, convention,
                     settings: ContactSettings | dict | None = None) -> FootMetrics:
    """Skate, penetration and height-weighted skate of a clip's feet during the given contacts.

    contacts.support must be levels of this clip: the FootContacts detected on it, or the source's
    carried over with carry_contacts (fix_contacts does that itself).
    """
    st = _settings(settings)
    _check_frames(contacts, motion)
    ft = _feet(motion, legs, convention, contacts.feet)
    flat = _flat_offset(ft, _level_frames(ft, np.asarray(contacts.flags), st))
    return _measure(ft, flat, contacts, st.skate_height)


# ----- two-bone IK ---------------------------------------------------------------------------------------

class IKSolution(NamedTuple):
    """Result of two_bone_ik. hip_turn, knee_turn: (..., 4) global rotations to apply about the hip and
    the knee (the knee's first, then the hip's); knee, ankle: (..., 3) the new joint positions."""

    hip_turn: np.ndarray
    knee_turn: np.ndarray
    knee: np.ndarray
    ankle: np.ndarray


def _unit(v: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    n = np.linalg.norm(v, axis=-1, keepdims=True)
    return v / np.where(n > 1e-300, n, 1.0), n[..., 0]


def two_bone_ik(hip: np.ndarray, knee: np.ndarray, ankle: np.ndarray, target: np.ndarray,
                bend_axis: np.ndarray | None = None, max_reach: np.ndarray | float | None = None) -> IKSolution:
    """Analytic two-bone IK, vectorised over leading axes.

    hip, knee, ankle, target: (..., 3) positions. The bone lengths a = |knee - hip|, b = |ankle - knee| are
    kept; the hip-to-ankle distance becomes c = |target - hip| (clamped to [|a - b|, min(a + b,
    max_reach)]), so the knee's interior angle follows the law of cosines, cos = (a^2 + b^2 - c^2) / 2ab.
    The knee turns in its current bend plane (the pole is the current knee); when the leg is nearly
    straight, that plane is ill defined and bend_axis ((..., 3), the direction of (knee - hip) x (ankle -
    knee) for a normal bend) decides it. The hip then turns the shortest way to point the leg at the
    target. With target == ankle both turns are the identity.
    """
    hip, knee, ankle, target = (np.asarray(x, dtype=np.float64) for x in (hip, knee, ankle, target))
    u = knee - hip
    v = ankle - knee
    a = np.linalg.norm(u, axis=-1)
    b = np.linalg.norm(v, axis=-1)
    n_cur, sin_ab = _unit(np.cross(u, v))
    sin_bend = sin_ab / np.maximum(a * b, 1e-300)  # sine of the knee's flexion
    uh, _ = _unit(u)
    axis = n_cur
    if bend_axis is not None:
        ba = np.broadcast_to(np.asarray(bend_axis, dtype=np.float64), u.shape)
        ba = ba - np.sum(ba * uh, axis=-1, keepdims=True) * uh
        ba, ban = _unit(ba)
        s0 = 0.1  # below sin 5.7 degrees of flexion the current bend plane gives way to bend_axis
        agree = np.sum(n_cur * ba, axis=-1) >= 0.0
        w = np.clip(sin_bend / s0, 0.0, 1.0)[..., None]
        # Bent the usual way: fade from the current plane to bend_axis as the leg straightens.
        # Slightly overstretched the other way: bend the usual way.
        blended, bn = _unit(np.where(agree[..., None], w * n_cur + (1.0 - w) * ba, ba))
        use = (sin_bend < s0) & (ban > 1e-12) & (bn > 1e-12)
        axis = np.where(use[..., None], blended, n_cur)
    # Where nothing gives a plane (straight leg, no usable bend_axis), any normal to the thigh will do.
    _, an = _unit(axis)
    if np.any(an < 0.5):
        helper = np.where(np.abs(uh[..., 0:1]) < 0.9, np.array([1.0, 0.0, 0.0]), np.array([0.0, 1.0, 0.0]))
        alt, _ = _unit(np.cross(uh, helper))
        axis = np.where((an < 0.5)[..., None], alt, axis)

    reach = target - hip
    dist = np.linalg.norm(reach, axis=-1)
    top = (a + b) * (1.0 - 1e-9)
    if max_reach is not None:
        top = np.minimum(top, np.asarray(max_reach, dtype=np.float64))
    c = np.clip(dist, np.abs(a - b) * (1.0 + 1e-9), np.maximum(top, np.abs(a - b) * (1.0 + 1e-9)))
    cos_inner = np.clip((a * a + b * b - c * c) / np.maximum(2.0 * a * b, 1e-300), -1.0, 1.0)
    new_bend = np.pi - np.arccos(cos_inner)
    # The new shin direction, in the plane normal to ``axis``, new_bend away from the thigh's line.
    side = np.cross(axis, uh)
    shin = (np.cos(new_bend)[..., None] * uh + np.sin(new_bend)[..., None] * side) * b[..., None]
    knee_turn = quat.between_vectors(v, shin)
    ankle1 = knee + quat.rotate(knee_turn, v)
    hip_turn = quat.between_vectors(ankle1 - hip, np.where(dist[..., None] > 1e-12, reach, ankle1 - hip))
    new_knee = hip + quat.rotate(hip_turn, u)
    new_ankle = hip + quat.rotate(hip_turn, ankle1 - hip)
    return IKSolution(hip_turn, knee_turn, new_knee, new_ankle)


def _hinge_axis(grot_root: np.ndarray, hip: np.ndarray, knee: np.ndarray, ankle: np.ndarray,
                fallback: np.ndarray) -> np.ndarray:
    """(F, 3) the knee's usual bend normal, carried by the thigh: the mean over clearly bent frames of
    (knee - hip) x (ankle - knee) in the hip joint's frame, rotated back to each frame; ``fallback`` (a
    fixed direction, e.g. the figure's left) when the knee never bends."""
    u = knee - hip
    v = ankle - knee
    n, size = _unit(np.cross(u, v))
    bent = size > 0.2 * np.linalg.norm(u, axis=-1) * np.linalg.norm(v, axis=-1)
    if bent.sum() >= 1:
        local = quat.rotate(quat.conjugate(grot_root[bent]), n[bent]).sum(axis=0)
        local, ln = _unit(local)
        if ln > 1e-9:
            return quat.rotate(grot_root, local)
    return np.broadcast_to(fallback, u.shape)


# ----- fixing ------------------------------------------------------------------------------------------

def _foot_moves(contacts: FootContacts, sole: _Sole, step: np.ndarray, blend: int) -> tuple[np.ndarray, np.ndarray]:
    """Per foot, the rigid move of the foot (canonical metres) and its weight.

    Inside a contact the move stops the pivot (its horizontal slide is summed up and taken back, the
    sum anchored to zero over the contact's middle frames), sets the middle frames' sole on the support
    and keeps the sole from going under it. Around it
    the move eases in and out over ``blend`` frames; between two contacts closer than two windows it
    passes from one contact's move to the next. Returns (move (F, K, 3), weight (F, K) in [0, 1]);
    weight 0 marks frames left alone.
    """
    flags = np.asarray(contacts.flags)
    f, k = flags.shape
    move = np.zeros((f, k, 3))
    weight = np.zeros((f, k))
    level = np.full((f, k), np.nan)
    for i in range(k):
        runs = list(zip(*contact_runs(flags[:, i])))
        for s, e in runs:
            slide = np.zeros((e - s, 3))
            slide[1:, [0, 2]] = -np.cumsum(step[s + 1:e, i][:, [0, 2]], axis=0)
            mid = _middle(s, e)
            slide[:, [0, 2]] -= slide[mid.start - s:mid.stop - s, [0, 2]].mean(axis=0)
            # Vertically the foot keeps its own motion (landing, heel rise), shifted so that it stands on
            # the support as the source did (its low percentile there), and is lifted, smoothly,
            # wherever it would still go under it.
            ground = contacts.support[s:e, i]
            shift = ground - _support_level(sole.height[s:e, i])
            slide[:, 1] = shift + _envelope(np.maximum(0.0, ground - (sole.height[s:e, i] + shift)), 1)
            move[s:e, i] = slide
            weight[s:e, i] = 1.0
            level[s:e, i] = contacts.support[s:e, i]
        bounds = [(None, None)] + runs + [(None, None)]
        for (ps, pe), (ns, ne) in zip(bounds[:-1], bounds[1:]):
            g0 = 0 if pe is None else pe
            g1 = f if ns is None else ns
            if g1 <= g0 or (pe is None and ns is None):
                continue
            n = g1 - g0
            frames = np.arange(g0, g1)
            if pe is not None and ns is not None and n <= 2 * blend:
                t = _ease((frames - g0 + 1) / (n + 1))[:, None]
                move[g0:g1, i] = (1.0 - t) * move[pe - 1, i] + t * move[ns, i]
                weight[g0:g1, i] = 1.0
                level[g0:g1, i] = (1.0 - t[:, 0]) * level[pe - 1, i] + t[:, 0] * level[ns, i]
                continue
            if pe is not None:
                m = min(blend, n)
                fr = frames[:m]
                move[fr, i] = move[pe - 1, i]
                weight[fr, i] = _ease((pe + blend - fr) / (blend + 1))
                level[fr, i] = level[pe - 1, i]
            if ns is not None:
                m = min(blend, n)
                fr = frames[n - m:]
                move[fr, i] = move[ns, i]
                weight[fr, i] = _ease((fr - (ns - blend - 1)) / (blend + 1))
                level[fr, i] = level[ns, i]
    # Toes kept above the support while easing: lift what the eased move would leave under it, fully
    # in the half of the window next to the contact, fading out in the outer half.
    eased = weight[..., None] * move
    partial = (weight > 0) & (weight < 1) & np.isfinite(level)
    under = np.where(partial, np.maximum(0.0, level - (sole.height + eased[..., 1])), 0.0)
    eased[..., 1] += under * np.minimum(1.0, 2.0 * weight)
    return eased, weight


def _envelope(need: np.ndarray, radius: int) -> np.ndarray:
    """A smooth curve at or above ``need`` ((n,) >= 0): running maximum, then running mean, both over
    2 * radius + 1 samples (the ends repeat the end values)."""
    if not np.any(need > 0):
        return np.zeros_like(need)
    size = 2 * radius + 1
    windows = np.lib.stride_tricks.sliding_window_view
    peak = windows(np.pad(need, radius, mode="edge"), size).max(axis=1)
    return np.maximum(windows(np.pad(peak, radius, mode="edge"), size).mean(axis=1), need)


def _root_drop(need: np.ndarray, active: np.ndarray, radius: int) -> np.ndarray:
    """(F,) smooth root lowering >= need: a running maximum then a running mean over ``radius``
    frames, kept to the active frames."""
    return np.where(active, _envelope(need, radius), 0.0)


def fix_contacts(motion, legs: dict, contacts: FootContacts, convention,
                 settings: ContactSettings | dict | None = None):
    """Plant the target's feet on the source's contacts.

    motion: the target clip (after transfer, in the target's file space and units); legs and convention:
    the target's; contacts: flags from the source on the same frames (supports are carried over with
    carry_contacts). Changes the hip, knee and ankle local rotations of each leg (the ankle's so the
    foot keeps its global orientation) and the root translation, on contact frames and their blend
    windows only; every other frame is returned bit for bit.
    Returns (fixed Motion, ContactReport).
    """
    st = _settings(settings)
    sk = motion.skeleton
    ft, flat, sole, target_contacts = _on_target(motion, legs, contacts, convention, st)
    f, k = contacts.flags.shape
    fps = motion.fps
    before = _measure(ft, flat, target_contacts, st.skate_height)
    if f == 0 or not target_contacts.flags.any():
        return motion, contact_report(before, before, np.zeros((f, k), dtype=bool))

    blend = st.frames(st.blend, fps, 0)
    step = _pivot_step(sole, ft, flat)
    move, weight = _foot_moves(target_contacts, sole, step, blend)
    goal = ft.ankle + move  # (F, K, 3) canonical ankle targets

    # How far each leg may reach: what the clip already uses, or the allowance of full extension.
    a = np.linalg.norm(ft.knee - ft.hip, axis=-1)
    b = np.linalg.norm(ft.ankle - ft.knee, axis=-1)
    now = np.linalg.norm(ft.ankle - ft.hip, axis=-1)
    limit = np.minimum(np.maximum(now, st.reach * (a + b)), (a + b) * (1.0 - 1e-9))
    active_leg = weight > 0
    need = np.zeros(f)
    for i in range(k):
        d = goal[:, i] - ft.hip[:, i]
        dist = np.linalg.norm(d, axis=-1)
        flat2 = dist ** 2 - d[:, 1] ** 2
        room = np.sqrt(np.maximum(limit[:, i] ** 2 - flat2, 0.0))
        drop = np.where(dist > limit[:, i], -d[:, 1] - room, 0.0)
        drop = np.where(active_leg[:, i], np.clip(drop, 0.0, st.max_root_drop * ft.leg_length[i]), 0.0)
        need = np.maximum(need, drop)
    active = active_leg.any(axis=1)
    drop = _root_drop(need, active, max(1, blend // 2))
    drop = np.minimum(drop, st.max_root_drop * float(np.min(ft.leg_length)))

    # Back to file space: the IK runs on the file's own positions, lowered by the root drop.
    c, s = ft.to_canonical, ft.scale
    up_file = c[1]
    shift = -(drop / s)[:, None] * up_file[None, :]
    rotations = np.array(motion.rotations)
    root = np.array(motion.root_positions)
    lowered = drop > 0
    root[lowered] = root[lowered] + shift[lowered]
    grot, gpos = ft.grot, ft.gpos
    changed = np.zeros((f, k), dtype=bool)
    for i, name in enumerate(ft.names):
        leg = legs[name]
        rows = np.flatnonzero(active_leg[:, i] | lowered)
        if rows.size == 0:
            continue
        changed[rows, i] = True
        hip = gpos[rows, leg.root] + shift[rows]
        knee = gpos[rows, leg.mid] + shift[rows]
        ankle = gpos[rows, leg.end] + shift[rows]
        target = (goal[rows, i] / s) @ c  # canonical -> file
        hinge = _hinge_axis(grot[:, leg.root], gpos[:, leg.root], gpos[:, leg.mid], gpos[:, leg.end],
                            c[0])[rows]
        sol = two_bone_ik(hip, knee, ankle, target, bend_axis=hinge, max_reach=limit[rows, i] / s)
        g_root = grot[rows, leg.root]
        p_root = sk.parents[leg.root]
        g_par_root = grot[rows, p_root] if p_root >= 0 else quat.identity((rows.size,))
        new_root = quat.multiply(quat.conjugate(g_par_root), quat.multiply(sol.hip_turn, g_root))
        p_mid = sk.parents[leg.mid]
        new_mid = quat.multiply(quat.conjugate(grot[rows, p_mid]), quat.multiply(sol.knee_turn, grot[rows, leg.mid]))
        p_end = sk.parents[leg.end]
        turned = quat.multiply(sol.hip_turn, quat.multiply(sol.knee_turn, grot[rows, p_end]))
        new_end = quat.multiply(quat.conjugate(turned), grot[rows, leg.end])
        for j, q in ((leg.root, new_root), (leg.mid, new_mid), (leg.end, new_end)):
            q = quat.normalize(q)
            old = rotations[rows, j]
            rotations[rows, j] = np.where(np.sum(q * old, axis=-1, keepdims=True) < 0, -q, q)
    fixed = motion.replace(rotations=rotations, root_positions=root)
    ft_after = _feet(fixed, legs, convention, contacts.feet)
    after = _measure(ft_after, flat, target_contacts, st.skate_height)
    report = contact_report(before, after, changed, float(drop.max(initial=0.0)))
    return fixed, report


def plant_feet(source, source_legs: dict, source_convention, target, target_legs: dict, target_convention,
               settings: ContactSettings | dict | None = None, fix: bool = True):
    """The contact step of a retarget, in one call: detect on the source clip, then fix (or, with
    fix=False, only measure) the target clip of the same frames.

    Returns (target Motion, fixed or as given; ContactReport; the source's FootContacts).
    """
    st = _settings(settings)
    contacts = detect_contacts(source, source_legs, source_convention, st)
    if fix:
        fixed, report = fix_contacts(target, target_legs, contacts, target_convention, st)
        return fixed, report, contacts
    ft, flat, _, carried = _on_target(target, target_legs, contacts, target_convention, st)
    return target, contact_report(_measure(ft, flat, carried, st.skate_height)), contacts


# ----- detection summary (what `retarget contacts` shows) ---------------------------------------------

class ContactSpan(BaseModel):
    """One contact: frames [start, stop), its time and its support height."""

    model_config = ConfigDict(extra="forbid")

    start: int
    stop: int = Field(description="first frame after the contact")
    start_s: float
    stop_s: float
    support_m: float = Field(description="support height, canonical metres (+Y up)")


class FootSummary(BaseModel):
    """One foot's contacts and how much it slides during them."""

    model_config = ConfigDict(extra="forbid")

    foot: str
    contacts: int
    contact_frames: int
    share: float
    skate_leg_per_frame: float
    skate_cm_s: float
    penetration_cm: float
    weighted_skate_cm_s: float | None
    spans: list[ContactSpan]


class ContactSummary(BaseModel):
    """Foot contacts found on one clip."""

    model_config = ConfigDict(extra="forbid")

    file: str | None
    frames: int
    fps: float
    leg_length_m: list[float]
    ground_m: float | None
    skate_height_cm: float
    feet: list[FootSummary]


def summarize_contacts(contacts: FootContacts, metrics: FootMetrics, file: str | None = None) -> ContactSummary:
    """Per-foot contact spans and figures, for people (and --json)."""
    feet = []
    fps = contacts.fps
    for i, name in enumerate(contacts.feet):
        m = metrics.summary(i)
        spans = [ContactSpan(start=s, stop=e, start_s=s / fps, stop_s=e / fps,
                             support_m=float(contacts.support[s, i])) for s, e in contacts.segments(i)]
        feet.append(FootSummary(foot=name, contacts=len(spans), contact_frames=m["contact_frames"],
                                share=m["share"], skate_leg_per_frame=m["skate_leg_per_frame"],
                                skate_cm_s=m["skate_cm_s"], penetration_cm=m["penetration_max_cm"],
                                weighted_skate_cm_s=_finite(m["weighted_skate_cm_s"]), spans=spans))
    return ContactSummary(file=file, frames=contacts.num_frames, fps=fps,
                          leg_length_m=[float(x) for x in contacts.leg_length], ground_m=_finite(contacts.ground),
                          skate_height_cm=metrics.skate_height * 100.0, feet=feet)
