"""Preview: one self-contained HTML page showing a clip and its retargeted result side by side, and PNG
plots of feet, foot slide and pose fidelity.

The page carries its data as JSON inside a script element (no network, no external script or font).
Positions are put into the canonical space (+Y up, the character faces +Z, metres) and quantised: each
frame's anchor position (the pelvis, else the root joint) as int32 steps from a per-clip origin, every
point as int16 steps relative to that frame's anchor, both little-endian and base64-encoded. The step is 1 mm unless a point lies more than
32.7 m from its root, in which case the step grows so every offset still fits in int16.

Embedded data (key "sides", one entry for the source and one for the retargeted clip):
    label, file, fps, frames, joints (names, J), parents (J + T: the joints, then end-site tips),
    tip_of (T joint indices), side ("left", "right", "centre" per point), step (metres), origin (3,),
    anchor (point index), root (base64 int32 (F, 3): the anchor), points (base64 int16 (F, J + T, 3)),
    ground (metres), height (metres), feet ({foot key: [point indices]}), head (point index or null),
    loose (points whose bone to the parent changes length), facts (label -> value).
    A point's position is origin + (root[f] + points[f, p]) * step.
Top level: format, version, title, contacts ({foot key: [[start, stop), ...]] on source frames), numbers.
"""

from __future__ import annotations

import base64
import html
import io
import json
import math
import os
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from . import quat
from .errors import OptionError, RetargetError, SkeletonError
from .motion import Motion

__all__ = [
    "PreviewSide",
    "prepare_side",
    "build_preview",
    "write_preview",
    "plot_clip",
    "contact_run_pairs",
    "foot_slide",
    "segment_angles",
    "report_numbers",
    "contact_flags",
    "mapping_pairs",
]

FORMAT = "retarget-preview"
VERSION = 1
_INT16_MAX = 32767
# Ground is taken at the file's own zero height unless the clip's lowest points sit farther than this from
# it (metres); then the ground is estimated from the clip (common practice: captures often float a few cm).
_GROUND_TOLERANCE_M = 0.05
_SIDES = ("left", "right")


@dataclass(frozen=True, eq=False)
class PreviewSide:
    """One skeleton's clip, ready for display, in canonical space (+Y up, faces +Z, metres).

    points: (F, P, 3) positions of the J joints followed by the T end-site tips.
    parents: (P,) parent point of every point (-1 for the root); tip_of: (T,) joint of each tip.
    names: (J,) joint names; side: (P,) "left", "right" or "centre".
    feet: foot key ("left"/"right") -> point indices of that foot (ankle first, then toes and tips).
    ankles: foot key -> ankle joint index. head: head joint index or None.
    ground: height of the ground (metres); height: standing height of the figure (metres).
    anchor: the point the camera follows and positions are stored relative to (the pelvis when found).
    loose: (P,) True where a point's distance to its parent changes over the clip (animated offsets, such
        as a placement root left at the origin while the hips travel): not a rigid bone.
    """

    label: str
    file: str
    fps: float
    points: np.ndarray
    parents: np.ndarray
    tip_of: np.ndarray
    names: tuple[str, ...]
    side: tuple[str, ...]
    feet: dict
    ankles: dict
    head: int | None
    ground: float
    height: float
    anchor: int = 0
    loose: np.ndarray | None = None

    @property
    def num_frames(self) -> int:
        return self.points.shape[0]

    @property
    def num_joints(self) -> int:
        return len(self.names)


# ----- preparing a clip ------------------------------------------------------------------------------

def _body(motion: Motion):
    from .chains import analyze_body

    try:
        return analyze_body(motion.skeleton, motion)
    except SkeletonError:
        return None


def prepare_side(motion: Motion, convention=None, label: str = "") -> PreviewSide:
    """Canonical positions, sides, feet and ground of one clip.

    convention: the clip's Convention; detected from its skeleton when None (identity axes and metres when
    the skeleton has no recognisable body).
    """
    from .convention import Convention, detect_convention
    from .names import side_of_name

    skel = motion.skeleton
    body = _body(motion)
    if convention is None:
        convention = detect_convention(skel, motion, body=body) if body is not None else Convention()
    _check_finite(motion)
    grot, gpos = motion.global_transforms()
    tips = np.asarray(skel.tips)
    reach = float(np.abs(skel.offsets).max(initial=0.0))
    has_tip = ~np.isnan(tips).any(axis=1)
    has_tip[has_tip] = np.linalg.norm(tips[has_tip], axis=1) > 1e-6 * max(reach, 1e-9)
    tip_of = np.flatnonzero(has_tip)
    tip_pos = gpos[:, tip_of] + quat.rotate(grot[:, tip_of], tips[tip_of][None])
    pts = np.concatenate([gpos, tip_pos], axis=1)
    to_canon = convention.file_to_canonical() * convention.scale
    pts = pts @ to_canon.T
    parents = np.concatenate([skel.parents, tip_of]).astype(np.int64)

    j = skel.num_joints
    side = ["centre"] * j
    if body is not None:
        for ch in body.chains:
            for q in ch.joints:
                side[q] = ch.side
        for group in (body.legs, body.arms):
            for s, limb in group.items():
                for q in limb.joints:
                    side[q] = s
    for q in range(j):
        if side[q] == "centre" and (body is None or body.chain_of(q) is None or body.chain_of(q).kind == "extra"):
            named = side_of_name(skel.names[q])
            if named:
                side[q] = named
    side_all = tuple(side + [side[t] for t in tip_of])

    feet: dict[str, list[int]] = {}
    ankles: dict[str, int] = {}
    if body is not None:
        children = skel.children
        for s, limb in body.legs.items():
            foot = [limb.end]
            stack = list(children[limb.end])
            while stack:
                q = stack.pop()
                foot.append(q)
                stack.extend(children[q])
            foot_set = set(foot)
            foot += [j + k for k, t in enumerate(tip_of) if t in foot_set]
            feet[s] = foot
            ankles[s] = limb.end
    head = body.head if body is not None else None

    lowest = pts[:, :, 1].min(axis=1)
    floor = float(np.percentile(lowest, 5))
    ground = 0.0 if abs(floor) <= _GROUND_TOLERANCE_M else floor
    height = float(np.median(pts[:, :, 1].max(axis=1) - lowest))
    height = max(height, 1e-3)
    has_parent = parents >= 0
    lengths = np.linalg.norm(pts[:, has_parent] - pts[:, parents[has_parent]], axis=2)
    loose = np.zeros(len(parents), dtype=bool)
    # A rigid bone keeps its length to within float and quantisation noise; 1 % of the figure is far above.
    loose[has_parent] = np.ptp(lengths, axis=0) > 0.01 * height
    anchor = body.pelvis if body is not None else 0
    return PreviewSide(label, str(motion.source or skel.source or ""), motion.fps, pts, parents, tip_of,
                       tuple(skel.names), side_all, feet, ankles, head, ground, height, anchor, loose)


def _check_finite(motion: Motion) -> None:
    """RetargetError naming the first frame and joint whose rotation or translation is not a number."""
    names = motion.skeleton.names
    checks = [("rotation", motion.rotations, lambda j: names[j]),
              ("root position", motion.root_positions[:, None], lambda j: names[0])]
    if motion.translations is not None:
        checks.append(("translation", motion.translations, lambda j: names[j]))
    for what, arr, name in checks:
        bad = ~np.isfinite(arr).all(axis=-1)
        if bad.any():
            f, j = np.argwhere(bad)[0]
            raise RetargetError(f"{what} is not a finite number at frame {f}, joint {name(j)!r}",
                                path=motion.source or motion.skeleton.source)


def _frame_map(n_from: int, fps_from: float, n_to: int, fps_to: float) -> np.ndarray:
    """(n_from,) index into the other clip of the frame at the same time (nearest, clamped)."""
    t = np.arange(n_from) / fps_from
    return np.clip(np.rint(t * fps_to).astype(np.int64), 0, n_to - 1)


# ----- contacts and measures -------------------------------------------------------------------------

def contact_run_pairs(flags: np.ndarray) -> list[list[int]]:
    """contacts.contact_runs as JSON-ready [start, stop) pairs: [F F T T F T] -> [[2, 4], [5, 6]]."""
    from .contacts import contact_runs

    starts, stops = contact_runs(flags)
    return [[int(a), int(b)] for a, b in zip(starts, stops)]


def foot_slide(positions: np.ndarray, flags: np.ndarray) -> np.ndarray:
    """Cumulative horizontal slide of a foot while it is in contact.

    positions: (F, 3) canonical positions of the foot (Y up); flags: (F,) contact flags.
    A frame step counts when the foot is in contact on both of its frames. Returns (F,) metres.
    """
    p = np.asarray(positions, dtype=np.float64)[:, [0, 2]]
    c = np.asarray(flags, dtype=bool)
    step = np.linalg.norm(np.diff(p, axis=0), axis=1) * (c[1:] & c[:-1])
    return np.concatenate([[0.0], np.cumsum(step)])


def _resolve_contacts(contacts, source: PreviewSide, target: PreviewSide) -> dict[str, dict]:
    """Check contact flags and find the foot each key names on both sides.

    Keys are "left"/"right" or a joint name of either skeleton. Returns key -> {flags (F_source,),
    source: foot key or None, target: foot key or None, source_points, target_points}.
    """
    out: dict[str, dict] = {}
    if not contacts:
        return out
    for key, flags in contacts.items():
        a = np.asarray(flags)
        if a.ndim != 1 or a.shape[0] != source.num_frames:
            raise OptionError(f"contact flags for foot {key!r} have shape {a.shape}, expected "
                              f"({source.num_frames},) like the source clip")
        if a.dtype != bool and not np.isin(a, (0, 1)).all():
            raise OptionError(f"contact flags for foot {key!r} must be true/false values")
        entry = {"flags": a.astype(bool)}
        for name, side in (("source", source), ("target", target)):
            entry[name] = _foot_key(str(key), side, source, target)
        out[str(key)] = entry
    return out


def _foot_key(key: str, side: PreviewSide, source: PreviewSide, target: PreviewSide) -> str | None:
    """Which foot of ``side`` a contact key names: a side word, or the side of the leg holding the joint."""
    if key in _SIDES:
        return key if key in side.feet else None
    for s in (side, source, target):
        if key in s.names:
            j = s.names.index(key)
            for foot, pts in s.feet.items():
                if j in pts:
                    return foot if foot in side.feet else None
            # A joint above the ankle on a leg: its side.
            sd = s.side[j]
            if sd in side.feet and sd in s.feet:
                return sd
    return None


def _contact_numbers(resolved, source: PreviewSide, target: PreviewSide) -> dict:
    nums: dict = {}
    tmap = _frame_map(source.num_frames, source.fps, target.num_frames, target.fps)
    for key, e in resolved.items():
        flags = e["flags"]
        row = {"frames in contact": f"{100.0 * flags.mean():.0f} %"}
        for name, side, fl in (("source", source, flags), ("retargeted", target, None)):
            foot = e["source" if name == "source" else "target"]
            if foot is None:
                continue
            ankle = side.points[:, side.ankles[foot]]
            if fl is None:
                ankle = ankle[tmap]
                fl = flags
            row[f"{'source' if name == 'source' else 'result'} ankle travel while planted (cm)"] = round(100.0 * float(foot_slide(ankle, fl)[-1]), 1)
        nums[key] = row
    return nums


# ----- the page --------------------------------------------------------------------------------------

def _b64(a: np.ndarray) -> str:
    return base64.b64encode(np.ascontiguousarray(a).tobytes()).decode("ascii")


def _quantise(side: PreviewSide) -> dict:
    pts = side.points
    root = pts[:, side.anchor]
    span = float(np.abs(pts - root[:, None]).max(initial=0.0))
    step = max(0.001, span / (_INT16_MAX - 1))
    origin = np.round(root[0] / step) * step
    rq = np.rint((root - origin) / step)
    if np.abs(rq).max(initial=0) >= 2**31 - 1:
        raise RetargetError(f"the {side.label} clip travels too far to display ({np.abs(rq).max() * step:.0f} m)",
                            path=side.file or None)
    rel = np.rint((pts - origin) / step - rq[:, None])
    return {"step": step, "origin": [float(x) for x in origin],
            "root": _b64(rq.astype("<i4")), "points": _b64(rel.astype("<i2"))}


def _jsonable(value):
    """Numbers, strings, lists and dicts only; numpy scalars and arrays turned into Python, NaN into None."""
    if isinstance(value, dict):
        return {str(k): _jsonable(v) for k, v in value.items()}
    if isinstance(value, (list, tuple)):
        return [_jsonable(v) for v in value]
    if isinstance(value, np.ndarray):
        return _jsonable(value.tolist())
    if isinstance(value, (bool, np.bool_)):
        return bool(value)
    if isinstance(value, (int, np.integer)):
        return int(value)
    if isinstance(value, (float, np.floating)):
        v = float(value)
        return v if math.isfinite(v) else None
    if value is None or isinstance(value, str):
        return value
    return str(value)


def report_numbers(report) -> dict:
    """A report (pydantic model, dataclass, mapping or None) as a plain dict for the numbers panel."""
    if report is None:
        return {}
    if hasattr(report, "model_dump"):
        report = report.model_dump()
    elif hasattr(report, "__dataclass_fields__"):
        from dataclasses import asdict

        report = asdict(report)
    if not isinstance(report, dict):
        raise OptionError(f"numbers must be a mapping, got {type(report).__name__}")
    return _jsonable(report)


def contact_flags(contacts) -> dict[str, np.ndarray] | None:
    """Contact flags as {foot key: (F,) bool}, from a mapping, or from an object with ``flags`` (F, K) and
    foot names in ``feet`` or ``names`` (K,); None passes through."""
    if contacts is None or isinstance(contacts, dict):
        return contacts
    flags = np.asarray(getattr(contacts, "flags", None))
    keys = getattr(contacts, "feet", None) or getattr(contacts, "names", None)
    if flags.ndim != 2 or keys is None or len(keys) != flags.shape[1]:
        raise OptionError("contacts must map foot names to flags, or carry flags (F, K) with K foot names")
    return {str(k): flags[:, i] for i, k in enumerate(keys)}


def mapping_pairs(mapping) -> list[tuple[str, str]] | None:
    """(source, target) joint names from a mapping with ``pairs`` (items with .source/.target or keys)."""
    pairs = getattr(mapping, "pairs", None) if not isinstance(mapping, dict) else mapping.get("pairs")
    if pairs is None:
        return None
    out = []
    for p in pairs:
        if isinstance(p, dict):
            out.append((str(p["source"]), str(p["target"])))
        elif isinstance(p, (tuple, list)):
            out.append((str(p[0]), str(p[1])))
        else:
            out.append((str(p.source), str(p.target)))
    return out


def _side_json(side: PreviewSide) -> dict:
    d = {
        "label": side.label,
        "file": os.path.basename(side.file) if side.file else "",
        "fps": side.fps,
        "frames": side.num_frames,
        "joints": list(side.names),
        "parents": [int(p) for p in side.parents],
        "tip_of": [int(t) for t in side.tip_of],
        "side": list(side.side),
        "ground": round(side.ground, 4),
        "height": round(side.height, 4),
        "feet": {k: [int(q) for q in v] for k, v in side.feet.items()},
        "head": side.head,
        "anchor": side.anchor,
        "loose": [int(q) for q in np.flatnonzero(side.loose)],
        "facts": {
            "frames": side.num_frames,
            "frame rate": f"{side.fps:.4g} fps",
            "duration": f"{max(side.num_frames - 1, 0) / side.fps:.2f} s",
            "joints": side.num_joints,
            "figure height": f"{side.height:.2f} m",
            "ground at": f"{side.ground:+.3f} m",
        },
    }
    d.update(_quantise(side))
    return d


def build_preview(source: Motion, target: Motion, *, source_convention=None, target_convention=None,
                  contacts: dict | None = None, numbers: dict | None = None, title: str = "") -> str:
    """The HTML text of a self-contained page showing ``source`` and ``target`` side by side.

    contacts: foot key ("left"/"right" or a joint name) -> (F,) bool flags on the source's frames; drawn
        on the matching foot of both skeletons (the retargeted clip is matched by time).
    numbers: the clip's report (nested mapping of labels to values) shown in the numbers panel.
    """
    from .preview_page import render_page

    src = prepare_side(source, source_convention, "source")
    tgt = prepare_side(target, target_convention, "retargeted")
    resolved = _resolve_contacts(contacts, src, tgt)
    data = {
        "format": FORMAT,
        "version": VERSION,
        "title": title,
        "sides": [_side_json(src), _side_json(tgt)],
        "contacts": [{"key": k, "source": e["source"], "target": e["target"],
                      "runs": contact_run_pairs(e["flags"])} for k, e in resolved.items()],
        "contact_numbers": _contact_numbers(resolved, src, tgt),
        "numbers": report_numbers(numbers),
    }
    text = json.dumps(data, separators=(",", ":"), ensure_ascii=True, allow_nan=False)
    # No "<" at all inside the script element (so neither "</script" nor "<!--" can change how the page
    # parses it); the JSON parser reads the escape back as "<".
    text = text.replace("<", "\\u003c")
    return render_page(html.escape(title or _default_title(src, tgt)), text)


def _default_title(src: PreviewSide, tgt: PreviewSide) -> str:
    a = os.path.basename(src.file) or "source"
    b = os.path.basename(tgt.file) or "retargeted"
    return f"{a} \u2192 {b}"


def write_preview(path: str | os.PathLike, source: Motion, target: Motion, **options) -> Path:
    """Build the page (see build_preview for the options) and write it atomically to ``path``."""
    from .io.atomic import atomic_write

    return atomic_write(path, build_preview(source, target, **options).encode("utf-8"))


def write_result_preview(path: str | os.PathLike, source: Motion, result, title: str = "") -> Path:
    """The page for one retarget Result (its motion, source contacts and report numbers) beside its
    source clip."""
    return write_preview(path, source, result.motion, contacts=contact_flags(getattr(result, "contacts", None)),
                         numbers=report_numbers(result.report), title=title)


# ----- pose fidelity ---------------------------------------------------------------------------------

def segment_angles(source: Motion, target: Motion, pairs, *, source_convention=None,
                   target_convention=None) -> dict[str, np.ndarray]:
    """Per mapped target joint, the angle (degrees, (F_target,)) between its segment and the source's.

    pairs: (source joint, target joint) names. A pair's segment runs to the nearest later pair whose joints
    descend from both of its joints; pairs with no such partner (leaves) are left out. Both skeletons are
    compared in canonical space, the source matched to the target's frames by time.
    """
    src = prepare_side(source, source_convention, "source")
    tgt = prepare_side(target, target_convention, "retargeted")
    ss, ts = source.skeleton, target.skeleton
    idx = []
    for s, t in pairs:
        if s not in ss or t not in ts:
            missing = s if s not in ss else t
            raise OptionError(f"joint {missing!r} of a pair is not in its skeleton")
        idx.append((ss.index(s), ts.index(t)))
    smap = _frame_map(tgt.num_frames, tgt.fps, src.num_frames, src.fps)
    depth = ss.depths
    out: dict[str, np.ndarray] = {}
    for s, t in idx:
        below = [(depth[s2], s2, t2) for s2, t2 in idx if s2 != s and ss.is_ancestor(s, s2) and ts.is_ancestor(t, t2)]
        if not below:
            continue
        _, s2, t2 = min(below)
        a = src.points[smap, s2] - src.points[smap, s]
        b = tgt.points[:, t2] - tgt.points[:, t]
        na, nb = np.linalg.norm(a, axis=1), np.linalg.norm(b, axis=1)
        ok = (na > 1e-9) & (nb > 1e-9)
        cos = np.einsum("fk,fk->f", a, b) / np.where(ok, na * nb, 1.0)
        ang = np.degrees(np.arccos(np.clip(cos, -1.0, 1.0)))
        out[ts.names[t]] = np.where(ok, ang, np.nan)
    return out


# ----- plots -----------------------------------------------------------------------------------------

_C_SOURCE = "#6d7b8d"
_C_TARGET = "#e07a1f"
_C_BEFORE = "#b03a48"
_C_CONTACT = "#7fbf4d"


def _save(fig, path: Path) -> Path:
    from .io.atomic import atomic_write

    buf = io.BytesIO()
    fig.savefig(buf, format="png", dpi=110)
    atomic_write(path, buf.getvalue())
    return path


def plot_clip(folder: str | os.PathLike, source: Motion, target: Motion, *, before: Motion | None = None,
              source_convention=None, target_convention=None, contacts: dict | None = None,
              fidelity: dict | None = None, pairs=None, stem: str = "clip", title: str = "") -> list[Path]:
    """Write PNG plots of one clip into ``folder`` (created when missing) and return their paths.

    <stem>_feet.png      per foot: lowest foot point above the ground, source and retargeted, with the
                         contact frames shaded (needs feet found on the skeletons).
    <stem>_slide.png     per foot: cumulative ankle slide while in contact, source, retargeted before the
                         contact fix (``before``, a clip on the target skeleton) and after (needs contacts).
    <stem>_fidelity.png  per target joint: mean and 95th percentile angle to the source segment, from
                         ``fidelity`` (joint -> degrees, one value or (F,)) or computed from ``pairs``.
    """
    try:
        import matplotlib

        matplotlib.use("Agg")
        import matplotlib.pyplot as plt
    except ImportError as exc:  # pragma: no cover - depends on the installation
        raise OptionError("plots need matplotlib: pip install matplotlib") from exc

    folder = Path(folder)
    try:
        folder.mkdir(parents=True, exist_ok=True)
    except OSError as exc:
        raise RetargetError(f"cannot create the plot folder: {exc.strerror}", path=str(folder)) from exc
    src = prepare_side(source, source_convention, "source")
    tgt = prepare_side(target, target_convention, "retargeted")
    pre = prepare_side(before, target_convention, "before") if before is not None else None
    resolved = _resolve_contacts(contacts, src, tgt)
    head = f"{title}: " if title else ""
    written: list[Path] = []
    ts_src = np.arange(src.num_frames) / src.fps
    ts_tgt = np.arange(tgt.num_frames) / tgt.fps

    feet = [f for f in _SIDES if f in src.feet or f in tgt.feet]
    if feet:
        fig, axes = plt.subplots(len(feet), 1, figsize=(9, 2.4 * len(feet) + 0.6), sharex=True, squeeze=False)
        for ax, foot in zip(axes[:, 0], feet):
            for side, t, colour in ((src, ts_src, _C_SOURCE), (tgt, ts_tgt, _C_TARGET)):
                if foot in side.feet:
                    h = side.points[:, side.feet[foot], 1].min(axis=1) - side.ground
                    ax.plot(t, 100.0 * h, color=colour, lw=1.3, label=side.label)
            for key, e in resolved.items():
                if e["source"] == foot or e["target"] == foot:
                    ax.fill_between(ts_src, 0, 1, where=e["flags"], transform=ax.get_xaxis_transform(),
                                    color=_C_CONTACT, alpha=0.25, lw=0, label=f"contact ({key})")
            ax.axhline(0.0, color="#999999", lw=0.8)
            ax.set_ylabel(f"{foot} foot\nheight (cm)")
            ax.legend(loc="upper right", fontsize=8, framealpha=0.85)
            ax.grid(alpha=0.25)
        axes[-1, 0].set_xlabel("time (s)")
        fig.suptitle(f"{head}foot height above the ground")
        fig.tight_layout()
        written.append(_save(fig, folder / f"{stem}_feet.png"))
        plt.close(fig)

    keys = [k for k, e in resolved.items() if e["source"] is not None or e["target"] is not None]
    if keys:
        fig, axes = plt.subplots(1, len(keys), figsize=(4.6 * len(keys) + 0.4, 3.4), squeeze=False)
        for ax, key in zip(axes[0], keys):
            e = resolved[key]
            lines = [(src, e["source"], ts_src, _C_SOURCE, "source", "-")]
            if pre is not None:
                lines.append((pre, e["target"], np.arange(pre.num_frames) / pre.fps, _C_BEFORE,
                              "before contact fix", "--"))
            lines.append((tgt, e["target"], ts_tgt, _C_TARGET, "after contact fix" if pre is not None
                          else "retargeted", "-"))
            for side, foot, t, colour, label, style in lines:
                if foot is None:
                    continue
                fmap = _frame_map(side.num_frames, side.fps, src.num_frames, src.fps)
                slide = foot_slide(side.points[:, side.ankles[foot]], e["flags"][fmap])
                ax.plot(t, 100.0 * slide, style, color=colour, lw=1.4, label=f"{label}: {100 * slide[-1]:.1f} cm")
            ax.set_title(f"{key}")
            ax.set_xlabel("time (s)")
            ax.set_ylabel("slide while in contact (cm)")
            ax.legend(loc="upper left", fontsize=8, frameon=False)
            ax.grid(alpha=0.25)
        fig.suptitle(f"{head}foot slide during contact, cumulative")
        fig.tight_layout()
        written.append(_save(fig, folder / f"{stem}_slide.png"))
        plt.close(fig)

    if fidelity is None and pairs is not None:
        fidelity = segment_angles(source, target, pairs, source_convention=source_convention,
                                  target_convention=target_convention)
    if fidelity:
        names = list(fidelity)
        vals = [np.atleast_1d(np.asarray(fidelity[n], dtype=np.float64)) for n in names]
        vals = [v[np.isfinite(v)] for v in vals]
        mean = np.array([v.mean() if v.size else np.nan for v in vals])
        p95 = np.array([np.percentile(v, 95) if v.size else np.nan for v in vals])
        y = np.arange(len(names))
        fig, ax = plt.subplots(figsize=(8, 0.26 * len(names) + 1.4))
        ax.barh(y, p95, color=_C_TARGET, alpha=0.35, label="95th percentile")
        ax.barh(y, mean, height=0.45, color=_C_TARGET, label="mean")
        ax.set_yticks(y, names, fontsize=8)
        ax.invert_yaxis()
        top = float(np.nanmax(p95)) if np.isfinite(p95).any() else 0.0
        ax.set_xlim(0.0, max(5.0, 1.08 * top))  # a perfect match reads as empty bars on a readable scale
        ax.set_xlabel("angle to the source segment (degrees)")
        ax.legend(loc="lower right", fontsize=8, frameon=False)
        ax.grid(axis="x", alpha=0.25)
        ax.set_title(f"{head}pose fidelity per joint")
        fig.tight_layout()
        written.append(_save(fig, folder / f"{stem}_fidelity.png"))
        plt.close(fig)
    return written
