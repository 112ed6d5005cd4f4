"""Frame ranges and frame-rate changes of whole clips."""

from __future__ import annotations

import numpy as np

from . import quat
from .errors import OptionError
from .motion import Motion

__all__ = ["frame_range", "select_frames", "resample"]


def frame_range(motion: Motion, start: int | None = None, stop: int | None = None) -> tuple[int, int]:
    """The frames [a, b) that start:stop selects (0-based, stop excluded, None means the clip's end,
    negative values count from the end, as in Python). OptionError naming the clip when the range is
    empty or outside the clip."""
    n = motion.num_frames
    a = 0 if start is None else (start + n if start < 0 else start)
    b = n if stop is None else (stop + n if stop < 0 else stop)
    if not (0 <= a < b <= n):
        raise OptionError(f"frame range {'' if start is None else start}:{'' if stop is None else stop} "
                          f"selects no frames of a {n}-frame clip (0-based, end excluded)", path=motion.source)
    return a, b


def select_frames(motion: Motion, start: int | None = None, stop: int | None = None) -> Motion:
    """Frames start:stop of a clip, as frame_range reads them."""
    return motion.slice(*frame_range(motion, start, stop))


def resample(motion: Motion, fps: float) -> Motion:
    """The clip at another frame rate over the same time span: rotations by slerp between the two nearest
    frames, positions linearly. rotations: (F, J, 4) -> (F', J, 4) with F' = floor(duration * fps) + 1."""
    if not (np.isfinite(fps) and fps > 0):
        raise OptionError(f"frame rate must be a positive number, got {fps}")
    n = motion.num_frames
    if n < 2 or fps == motion.fps:
        return motion.replace(fps=fps)
    count = int(np.floor(motion.duration * fps + 1e-9)) + 1
    pos = np.arange(count) * (motion.fps / fps)
    i0 = np.minimum(np.floor(pos).astype(np.int64), n - 1)
    i1 = np.minimum(i0 + 1, n - 1)
    w = pos - i0
    rot = quat.slerp(motion.rotations[i0], motion.rotations[i1], np.broadcast_to(w[:, None], (count,
                                                                                         motion.skeleton.num_joints)))
    root = motion.root_positions[i0] * (1 - w[:, None]) + motion.root_positions[i1] * w[:, None]
    tr = None
    if motion.translations is not None:
        tr = motion.translations[i0] * (1 - w[:, None, None]) + motion.translations[i1] * w[:, None, None]
    return motion.replace(rotations=rot, root_positions=root, translations=tr, fps=float(fps))
