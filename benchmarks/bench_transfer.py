"""Retargeting speed: a 60-joint, 10,000-frame humanoid clip onto a 50-joint rig.

Targets (2-core machine): end to end (read clip and rig, retarget, write) <= 3x np.loadtxt of the same
clip file; the transfer step alone >= 100,000 frames per second.

Reported: end to end as apply runs it (foot contacts detected and fixed) and with contact_fix=False (the
contact step still detects and measures), each by stage (read, retarget, write); the transfer step and
the contact step alone; the apply command in a fresh interpreter (start-up and imports included), with
a mapping file, without the contact fix, and matched automatically; peak Python memory.
Run: python benchmarks/bench_transfer.py
"""

from __future__ import annotations

import json
import subprocess
import sys
import time
from pathlib import Path

import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))

from benchmarks.common import DATA, best_of, peak_python_mb  # noqa: E402
from retarget import Motion, Skeleton, quat  # noqa: E402
from retarget.io import read_bvh, write_bvh  # noqa: E402

FINGERS = ("thumb", "index", "middle", "ring", "pinky")


def humanoid(spine: int, finger_joints: int, twists: tuple[str, ...], head_end: bool, unit: float,
             prefix: str) -> Skeleton:
    """An invented humanoid in Y-up, facing +Z, T-pose; lengths in metres divided by ``unit``.

    spine: joints between the pelvis and the chest; finger_joints: joints per finger (five fingers);
    twists: which bones get a twist leaf ("upperarm", "forearm", "thigh", "calf")."""
    rows: list[tuple[str, str | None, tuple[float, float, float]]] = [("pelvis", None, (0, 0.97, 0))]
    prev = "pelvis"
    for i in range(spine):
        rows.append((f"spine{i + 1}", prev, (0, 0.36 / (spine + 1), 0)))
        prev = f"spine{i + 1}"
    rows.append(("chest", prev, (0, 0.36 / (spine + 1), 0)))
    rows += [("neck", "chest", (0, 0.12, 0.01)), ("head", "neck", (0, 0.09, 0.01))]
    if head_end:
        rows.append(("head_end", "head", (0, 0.12, 0.0)))
    for s, x in (("l", 1.0), ("r", -1.0)):
        rows += [(f"clavicle_{s}", "chest", (x * 0.03, 0.06, 0.02)),
                 (f"upperarm_{s}", f"clavicle_{s}", (x * 0.14, 0, -0.02)),
                 (f"forearm_{s}", f"upperarm_{s}", (x * 0.28, 0, 0)),
                 (f"hand_{s}", f"forearm_{s}", (x * 0.25, 0, 0))]
        for k, f in enumerate(FINGERS):
            parent = f"hand_{s}"
            for i in range(finger_joints):
                off = (x * (0.08 if i == 0 else 0.03), 0, 0.04 - 0.02 * k) if i == 0 else (x * 0.03, 0, 0)
                rows.append((f"{f}{i + 1}_{s}", parent, off))
                parent = f"{f}{i + 1}_{s}"
        rows += [(f"thigh_{s}", "pelvis", (x * 0.09, -0.08, 0)),
                 (f"calf_{s}", f"thigh_{s}", (0, -0.42, 0.01)),
                 (f"foot_{s}", f"calf_{s}", (0, -0.40, -0.02)),
                 (f"toe_{s}", f"foot_{s}", (0, -0.06, 0.13))]
        for t in twists:
            host = {"upperarm": "upperarm", "forearm": "forearm", "thigh": "thigh", "calf": "calf"}[t]
            child = {"upperarm": "forearm", "forearm": "hand", "thigh": "calf", "calf": "foot"}[t]
            off = np.array(dict((r[0], r[2]) for r in rows)[f"{child}_{s}"]) * 0.5
            rows.append((f"{t}_twist_{s}", f"{host}_{s}", tuple(off)))
    order: list = []
    placed: set = set()
    while len(order) < len(rows):
        for r in rows:
            if r[0] not in placed and (r[1] is None or r[1] in placed):
                order.append(r)
                placed.add(r[0])
    names = [prefix + r[0] for r in order]
    index = {r[0]: i for i, r in enumerate(order)}
    parents = np.array([-1 if r[1] is None else index[r[1]] for r in order])
    offsets = np.array([r[2] for r in order], dtype=float) / unit
    tips = np.full((len(order), 3), np.nan)
    for i, r in enumerate(order):
        if i not in parents:
            tips[i] = offsets[i] * 0.5 if i else (0, 0.1, 0)
    root = ("Xposition", "Yposition", "Zposition", "Zrotation", "Xrotation", "Yrotation")
    chans = (root,) + (("Zrotation", "Xrotation", "Yrotation"),) * (len(order) - 1)
    return Skeleton(tuple(names), parents, offsets, tips=tips, channels=chans)


def source_skeleton() -> Skeleton:
    """60 joints: pelvis, 3 spine, chest, neck, head, head end, clavicles, arms, 3-joint fingers, legs,
    twist leaves on upper arms and forearms and thighs; centimetres."""
    sk = humanoid(3, 3, ("upperarm", "forearm", "thigh"), True, 0.01, "cap_")
    assert sk.num_joints == 60, sk.num_joints
    return sk


def target_skeleton() -> Skeleton:
    """50 joints: pelvis, 2 spine, chest, neck, head, clavicles, arms, 2-joint fingers, legs, four twist
    leaves per side; metres."""
    sk = humanoid(2, 2, ("upperarm", "forearm", "thigh", "calf"), False, 1.0, "")
    assert sk.num_joints == 50, sk.num_joints
    return sk


def clip(frames: int = 10_000, seed: int = 0) -> Motion:
    """Smooth invented motion at 120 fps: each joint's Euler angles are sums of a few sines (up to about
    40 degrees), the pelvis travels forward."""
    rng = np.random.default_rng(seed)
    sk = source_skeleton()
    j = sk.num_joints
    t = np.arange(frames)[:, None, None] / 120.0
    amp = rng.uniform(3, 20, (2, j, 3))
    freq = rng.uniform(0.2, 1.5, (2, j, 3))
    phase = rng.uniform(0, 2 * np.pi, (2, j, 3))
    angles = (amp[0] * np.sin(2 * np.pi * freq[0] * t + phase[0])
              + amp[1] * np.sin(2 * np.pi * freq[1] * t + phase[1]))
    rot = quat.from_euler(angles, "ZXY", degrees=True)
    tt = t[:, 0, 0]
    root = np.stack([5 * np.sin(tt), 97 + 2 * np.sin(4 * tt), 120 * tt], axis=1)
    return Motion(sk, rot, root, 120.0)


def ensure_files() -> tuple[Path, Path]:
    DATA.mkdir(exist_ok=True)
    clip_path = DATA / "humanoid_60j_10000f.bvh"
    rig_path = DATA / "humanoid_50j_rig.bvh"
    if not clip_path.exists():
        write_bvh(clip_path, clip())
    if not rig_path.exists():
        write_bvh(rig_path, Motion.rest(target_skeleton()))
    return clip_path, rig_path


def name_pairs(source: Skeleton, target: Skeleton) -> list[tuple[str, str]]:
    """The true correspondence: same body part name on both (prefix stripped)."""
    tnames = set(target.names)
    return [(n, n[4:]) for n in source.names if n[4:] in tnames]


def _stages(clip_path: Path, rig_path: Path, out_path: Path, mapping, contact_fix: bool) -> dict[str, float]:
    """One end-to-end run as the apply command does it (read clip and rig, retarget, write), timed by stage."""
    from retarget.io import write_motion
    from retarget.pipeline import retarget_clip

    t0 = time.perf_counter()
    m = read_bvh(clip_path)
    r = read_bvh(rig_path)
    t1 = time.perf_counter()
    res = retarget_clip(m, r, mapping, contact_fix=contact_fix)
    t2 = time.perf_counter()
    write_motion(out_path, res.motion)
    t3 = time.perf_counter()
    return {"total": t3 - t0, "read": t1 - t0, "retarget": t2 - t1, "write": t3 - t2}


def _best_stages(repeat: int, *args) -> dict[str, float]:
    runs = [_stages(*args) for _ in range(repeat)]
    return min(runs, key=lambda r: r["total"])


def _cli_seconds(args: list[str], repeat: int = 2) -> float:
    """Wall time of the command line in a fresh interpreter (start-up and imports included)."""
    best = float("inf")
    for _ in range(repeat):
        t0 = time.perf_counter()
        subprocess.run([sys.executable, "-m", "retarget.cli", *args], check=True, capture_output=True)
        best = min(best, time.perf_counter() - t0)
    return best


def main() -> dict:
    from retarget.align import align
    from retarget.chains import analyze_body
    from retarget.contacts import plant_feet
    from retarget.convention import detect_convention
    from retarget.mapping import JointPair, Mapping, save_mapping
    from retarget.transfer import transfer

    clip_path, rig_path = ensure_files()
    out_path = DATA / "retargeted.bvh"
    text = clip_path.read_text()
    header_lines = text[: text.index("Frame Time:")].count("\n") + 1

    def loadtxt():
        np.loadtxt(clip_path, skiprows=header_lines)

    motion = read_bvh(clip_path)
    rig = read_bvh(rig_path)
    pairs = name_pairs(motion.skeleton, rig.skeleton)

    idx = [(motion.skeleton.index(a), rig.skeleton.index(b)) for a, b in pairs]
    al = align(motion.skeleton, rig.skeleton, idx, source_motion=motion)
    transfer_s = best_of(lambda: transfer(motion, al), repeat=5)
    # The contact step alone, as the pipeline runs it on the transferred clip.
    sbody, tbody = analyze_body(motion.skeleton, motion), analyze_body(rig.skeleton, rig)
    sconv = detect_convention(motion.skeleton, motion, sbody)
    tconv = detect_convention(rig.skeleton, rig, tbody)
    moved = transfer(motion, al)
    contacts_s = best_of(lambda: plant_feet(motion, sbody.legs, sconv, moved, tbody.legs, tconv), repeat=3)
    contacts_measure_s = best_of(lambda: plant_feet(motion, sbody.legs, sconv, moved, tbody.legs, tconv, fix=False),
                                 repeat=3)

    loadtxt_s = best_of(loadtxt)
    args = (clip_path, rig_path, out_path, pairs)
    with_fix = _best_stages(3, *args, True)
    no_fix = _best_stages(3, *args, False)
    auto = _best_stages(2, clip_path, rig_path, out_path, None, True)  # the first loads scipy.optimize

    mapping_path = DATA / "humanoid.mapping.yaml"
    save_mapping(Mapping(pairs=[JointPair(source=a, target=b, confidence=1.0, reason="given") for a, b in pairs]),
                 mapping_path)
    cli = ["apply", str(clip_path), "--rig", str(rig_path), "-o", str(out_path)]
    res = {
        "source_joints": motion.skeleton.num_joints,
        "target_joints": rig.skeleton.num_joints,
        "frames": motion.num_frames,
        "pairs": len(pairs),
        "np_loadtxt_s": loadtxt_s,
        "end_to_end_s": with_fix["total"],
        "end_to_end_over_loadtxt": with_fix["total"] / loadtxt_s,
        "stages_s": {k: v for k, v in with_fix.items() if k != "total"},
        "end_to_end_no_contact_fix_s": no_fix["total"],
        "end_to_end_no_contact_fix_over_loadtxt": no_fix["total"] / loadtxt_s,
        "stages_no_contact_fix_s": {k: v for k, v in no_fix.items() if k != "total"},
        "end_to_end_auto_match_s": auto["total"],
        "align_s": best_of(lambda: align(motion.skeleton, rig.skeleton, idx, source_motion=motion)),
        "transfer_s": transfer_s,
        "transfer_frames_per_s": motion.num_frames / transfer_s,
        "contact_step_s": contacts_s,
        "contact_step_measure_only_s": contacts_measure_s,
        "cli_apply_s": _cli_seconds(cli + ["-m", str(mapping_path)]),
        "cli_apply_no_contact_fix_s": _cli_seconds(cli + ["-m", str(mapping_path), "--no-contact-fix"]),
        "cli_apply_auto_match_s": _cli_seconds(cli),
        "peak_transfer_mb": peak_python_mb(lambda: transfer(motion, al)),
        "peak_end_to_end_mb": peak_python_mb(lambda: _stages(*args, True)),
    }
    out_path.unlink(missing_ok=True)
    return _rounded(res)


def _rounded(res):
    if isinstance(res, dict):
        return {k: _rounded(v) for k, v in res.items()}
    return round(res, 3) if isinstance(res, float) else res


if __name__ == "__main__":
    print(json.dumps(main(), indent=2))
