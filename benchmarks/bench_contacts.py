"""Foot contact detection and fixing on a long clip: the demo walk repeated to 50,000 frames (about 7
minutes at 120 fps), fixed as a retarget would leave it (root path x1.2).

Reports frames per second for detection, for the fix (IK, root lowering, before/after metrics) and for
the metrics alone, plus peak Python memory; and for the whole retarget_clip onto the demo rig Brannoc with
the contact fix and with contact_fix=False (which still detects and measures), so the share of the
contact step in a retarget shows. Goal (2-core machine): detection and fix each well above
real time, i.e. far more than 120 frames/s. Run: python benchmarks/bench_contacts.py
"""

from __future__ import annotations

import json
import sys
from pathlib import Path

import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))

from benchmarks.common import best_of, peak_python_mb  # noqa: E402
from retarget.chains import analyze_body  # noqa: E402
from retarget.contacts import carry_contacts, detect_contacts, fix_contacts, measure_contacts  # noqa: E402
from retarget.convention import detect_convention  # noqa: E402
from retarget.io import read_bvh  # noqa: E402

TAKE = Path(__file__).resolve().parents[1] / "demo_clips" / "capture" / "walk.bvh"
RIG = Path(__file__).resolve().parents[1] / "demo_clips" / "rigs" / "brannoc_stocky.bvh"


def long_walk(frames: int = 50_000):
    """The demo walk tiled end to end, each copy carried on by the distance the previous one covered."""
    walk = read_bvh(TAKE)
    n = walk.num_frames
    copies = -(-frames // n)
    travel = walk.root_positions[-1] - walk.root_positions[0]
    rot = np.concatenate([walk.rotations] * copies)[:frames]
    root = np.concatenate([walk.root_positions + k * travel for k in range(copies)])[:frames]
    return walk.replace(rotations=rot, root_positions=root)


def main() -> dict:
    motion = long_walk()
    body = analyze_body(motion.skeleton, motion.slice(0, 600))
    legs = body.legs
    conv = detect_convention(motion.skeleton, motion.slice(0, 600), body)
    target = motion.replace(root_positions=motion.root_positions * 1.2)
    contacts = detect_contacts(motion, legs, conv)
    carried = carry_contacts(contacts, target, legs, conv)
    f = motion.num_frames
    detect_s = best_of(lambda: detect_contacts(motion, legs, conv), repeat=2)
    fix_s = best_of(lambda: fix_contacts(target, legs, contacts, conv), repeat=2)
    measure_s = best_of(lambda: measure_contacts(target, legs, carried, conv), repeat=2)
    _, report = fix_contacts(target, legs, contacts, conv)
    from retarget import retarget_clip

    rig = read_bvh(RIG)
    pipeline_s = best_of(lambda: retarget_clip(motion, rig), repeat=2)
    measure_only_s = best_of(lambda: retarget_clip(motion, rig, contact_fix=False), repeat=2)
    res = {
        "frames": f,
        "joints": motion.skeleton.num_joints,
        "contacts": report.overall.contacts,
        "detect_s": detect_s,
        "detect_frames_per_s": f / detect_s,
        "fix_s": fix_s,
        "fix_frames_per_s": f / fix_s,
        "measure_frames_per_s": f / measure_s,
        "retarget_clip_frames_per_s": f / pipeline_s,
        "retarget_clip_measure_only_frames_per_s": f / measure_only_s,
        "skate_before_cm_s": report.overall.skate_before_cm_s,
        "skate_after_cm_s": report.overall.skate_after_cm_s,
        "peak_detect_mb": peak_python_mb(lambda: detect_contacts(motion, legs, conv)),
        "peak_fix_mb": peak_python_mb(lambda: fix_contacts(target, legs, contacts, conv)),
    }
    return {k: round(v, 3) if isinstance(v, float) else v for k, v in res.items()}


if __name__ == "__main__":
    print(json.dumps(main(), indent=2))
