"""BVH read, forward kinematics and write on a 60-joint, 10,000-frame clip, next to np.loadtxt.

Targets (2-core machine): read <= 1.5x np.loadtxt of the same file, FK <= 0.1 s, write <= 1.5 s,
peak memory <= 300 MB. Run: python benchmarks/bench_bvh.py
"""

from __future__ import annotations

import json
import sys
from pathlib import Path

import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))

from benchmarks.common import best_of, ensure_big_file, peak_python_mb  # noqa: E402
from retarget.io import read_bvh, write_bvh  # noqa: E402


def main() -> dict:
    path = ensure_big_file()
    text = path.read_text()
    header_lines = text[: text.index("Frame Time:")].count("\n") + 1

    def loadtxt():
        # The same file, numbers only: skip the hierarchy and the two motion header lines.
        np.loadtxt(path, skiprows=header_lines)

    motion = read_bvh(path)
    out = path.with_name("written.bvh")
    res = {
        "frames": motion.num_frames,
        "joints": motion.skeleton.num_joints,
        "file_mb": round(path.stat().st_size / 1e6, 1),
        "np_loadtxt_s": best_of(loadtxt),
        "read_s": best_of(lambda: read_bvh(path)),
        "fk_s": best_of(lambda: motion.global_transforms()),
        "write_s": best_of(lambda: write_bvh(out, motion)),
    }
    res["read_over_loadtxt"] = res["read_s"] / res["np_loadtxt_s"]
    res["peak_read_mb"] = peak_python_mb(lambda: read_bvh(path))
    res["peak_fk_mb"] = peak_python_mb(lambda: motion.global_transforms())
    res["peak_write_mb"] = peak_python_mb(lambda: write_bvh(out, motion))
    out.unlink()
    return {k: round(v, 3) if isinstance(v, float) else v for k, v in res.items()}


if __name__ == "__main__":
    print(json.dumps(main(), indent=2))
