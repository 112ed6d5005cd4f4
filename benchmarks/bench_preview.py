"""Preview page size and build time on a 60-joint, 10,000-frame clip (shown on both sides), plus the
time to draw the plots.

Targets: page < 15 MB (also asserted by tests/test_preview.py), build well under a few seconds on a
2-core machine. Run: python benchmarks/bench_preview.py
"""

from __future__ import annotations

import json
import sys
import tempfile
from pathlib import Path

import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))

from benchmarks.common import best_of, big_clip, peak_python_mb  # noqa: E402
from retarget.convention import Convention  # noqa: E402
from retarget.preview import build_preview, plot_clip  # noqa: E402


def main() -> dict:
    motion = big_clip()
    conv = Convention(metres_per_unit=0.01)
    flags = (np.arange(motion.num_frames) // 50) % 2 == 0
    opts = dict(source_convention=conv, target_convention=conv, contacts={"left": flags})
    page = build_preview(motion, motion, **opts)
    res = {
        "frames": motion.num_frames,
        "joints": motion.skeleton.num_joints,
        "page_mb": round(len(page.encode()) / 1e6, 2),
        "build_s": best_of(lambda: build_preview(motion, motion, **opts), repeat=3),
        "peak_build_mb": peak_python_mb(lambda: build_preview(motion, motion, **opts)),
    }
    with tempfile.TemporaryDirectory() as tmp:
        res["plots_s"] = best_of(lambda: plot_clip(tmp, motion, motion, **opts), repeat=1)
    return {k: round(v, 3) if isinstance(v, float) else v for k, v in res.items()}


if __name__ == "__main__":
    print(json.dumps(main(), indent=2))
