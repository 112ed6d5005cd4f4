"""Shared pieces for the benchmarks: a large synthetic clip, timing and peak memory."""

from __future__ import annotations

import resource
import time
import tracemalloc
from contextlib import contextmanager
from pathlib import Path

import numpy as np

from retarget import Motion, Skeleton, quat

HERE = Path(__file__).resolve().parent
DATA = HERE / "_data"


def big_skeleton(joints: int = 60, seed: int = 0) -> Skeleton:
    """A tree of ``joints`` joints with mixed rotation orders and a 6-channel root (invented data)."""
    rng = np.random.default_rng(seed)
    parents = [-1] + [int(rng.integers(max(0, i - 4), i)) for i in range(1, joints)]
    offsets = rng.normal(size=(joints, 3)) * 10.0
    orders = ["ZXY", "XYZ", "YZX", "ZYX", "XZY", "YXZ"]
    channels = [("Xposition", "Yposition", "Zposition", "Zrotation", "Yrotation", "Xrotation")]
    for i in range(1, joints):
        channels.append(tuple(c + "rotation" for c in orders[i % 6]))
    return Skeleton(tuple(f"joint{i:02d}" for i in range(joints)), np.array(parents), offsets,
                    channels=tuple(channels))


def big_clip(frames: int = 10_000, joints: int = 60, seed: int = 0) -> Motion:
    """Smooth random motion: each joint's Euler angles are sums of a few sines."""
    rng = np.random.default_rng(seed)
    sk = big_skeleton(joints, seed)
    t = np.arange(frames)[:, None] / 120.0
    angles = np.zeros((frames, joints, 3))
    for k in range(3):
        amp = rng.uniform(5, 60, (joints, 3))
        freq = rng.uniform(0.2, 2.0, (joints, 3))
        phase = rng.uniform(0, 2 * np.pi, (joints, 3))
        angles += amp * np.sin(2 * np.pi * freq * t[..., None] + phase)
    rot = quat.from_euler(angles, "ZXY", degrees=True)
    root = np.cumsum(rng.normal(size=(frames, 3)), axis=0)
    return Motion(sk, rot, root, 120.0)


def ensure_big_file(frames: int = 10_000, joints: int = 60) -> Path:
    from retarget.io import write_bvh

    DATA.mkdir(exist_ok=True)
    path = DATA / f"big_{joints}j_{frames}f.bvh"
    if not path.exists():
        write_bvh(path, big_clip(frames, joints))
    return path


@contextmanager
def timed(results: dict, key: str):
    t0 = time.perf_counter()
    yield
    results[key] = time.perf_counter() - t0


def best_of(fn, repeat: int = 3) -> float:
    best = float("inf")
    for _ in range(repeat):
        t0 = time.perf_counter()
        fn()
        best = min(best, time.perf_counter() - t0)
    return best


def peak_python_mb(fn) -> float:
    """Peak memory allocated through Python (numpy included) while fn runs, MB."""
    tracemalloc.start()
    fn()
    peak = tracemalloc.get_traced_memory()[1]
    tracemalloc.stop()
    return peak / 1e6


def max_rss_mb() -> float:
    return resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024.0
