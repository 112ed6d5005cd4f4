"""Batch throughput: 200 demo clips onto one rig with 1 and with 2 worker processes.

Target (2-core machine): 2 workers >= 1.7x the clips per second of 1 worker.
Run: python benchmarks/bench_batch.py [--clips 200]
"""

from __future__ import annotations

import argparse
import json
import shutil
import sys
import tempfile
import time
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))

from retarget.batch import plan_batch, run_batch  # noqa: E402

REPO = Path(__file__).resolve().parents[1]
CAPTURE = REPO / "demo_clips" / "capture"
RIG = REPO / "demo_clips" / "rigs" / "brannoc_stocky.bvh"
MAPPING = REPO / "mappings" / "tallowmere_to_brannoc_stocky.yaml"


def main(clips: int = 200) -> dict:
    takes = sorted(CAPTURE.glob("*.bvh"))
    work = Path(tempfile.mkdtemp(prefix="bench_batch_"))
    try:
        lib = work / "library"
        lib.mkdir()
        for k in range(clips):
            shutil.copy(takes[k % len(takes)], lib / f"{takes[k % len(takes)].stem}_{k:03d}.bvh")
        res: dict = {"clips": clips, "frames_per_clip_mean": None}
        for workers in (1, 2):
            out = work / f"out{workers}"
            t0 = time.perf_counter()
            jobs, prior = plan_batch([str(lib)], RIG, out, mapping=MAPPING)
            report = run_batch(jobs, out, workers=workers, prior_rows=prior)
            seconds = time.perf_counter() - t0
            assert report.done == clips, report.failed
            res[f"workers_{workers}_s"] = round(seconds, 2)
            res[f"workers_{workers}_clips_per_s"] = round(clips / seconds, 2)
            res["frames_per_clip_mean"] = round(sum(r.frames for r in report.rows) / clips, 1)
        res["speedup"] = round(res["workers_1_s"] / res["workers_2_s"], 2)
        return res
    finally:
        shutil.rmtree(work, ignore_errors=True)


if __name__ == "__main__":
    ap = argparse.ArgumentParser()
    ap.add_argument("--clips", type=int, default=200)
    print(json.dumps(main(ap.parse_args().clips), indent=2))
