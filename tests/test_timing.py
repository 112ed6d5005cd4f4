"""Frame ranges and frame-rate resampling, checked against scipy's Slerp (outside reference)."""

from __future__ import annotations

import numpy as np
import pytest
from scipy.spatial.transform import Rotation, Slerp

from retarget import quat
from retarget.errors import OptionError
from retarget.motion import Motion
from retarget.skeleton import Skeleton
from retarget.timing import resample, select_frames


def _clip(frames=25, fps=30.0, seed=0) -> Motion:
    rng = np.random.default_rng(seed)
    sk = Skeleton(("a", "b", "c"), np.array([-1, 0, 1]), np.array([[0, 1, 0], [0, 1, 0], [0, 1, 0.0]]))
    # Smooth rotations: small steps about random axes, so neighbours are close (as in real clips).
    axes = rng.normal(size=(frames, 3, 3))
    axes /= np.linalg.norm(axes, axis=-1, keepdims=True)
    steps = quat.from_axis_angle(axes, rng.uniform(0, 0.3, (frames, 3)))
    rot = np.empty((frames, 3, 4))
    rot[0] = quat.identity((3,))
    for f in range(1, frames):  # test data only
        rot[f] = quat.multiply(steps[f], rot[f - 1])
    root = np.cumsum(rng.normal(size=(frames, 3)), axis=0)
    return Motion(sk, rot, root, fps)


def test_resample_matches_scipy_slerp():
    """30 -> 48 fps over the same time span: rotations equal scipy's Slerp at the new times (within
    1e-9 rad), positions are linear interpolation, the frame count covers the span."""
    m = _clip()
    out = resample(m, 48.0)
    assert out.fps == 48.0 and out.num_frames == int(np.floor(m.duration * 48.0 + 1e-9)) + 1
    t_old = np.arange(m.num_frames) / m.fps
    t_new = np.arange(out.num_frames) / 48.0
    for j in range(3):
        ref = Slerp(t_old, Rotation.from_quat(m.rotations[:, j]))(t_new).as_quat()
        assert quat.angle_between(out.rotations[:, j], ref).max() < 1e-9
    for k in range(3):
        assert np.allclose(out.root_positions[:, k], np.interp(t_new, t_old, m.root_positions[:, k]))


def test_resample_to_same_rate_and_bad_rate():
    m = _clip()
    same = resample(m, m.fps)
    assert np.array_equal(same.rotations, m.rotations)
    with pytest.raises(OptionError, match="positive"):
        resample(m, 0.0)


def test_select_frames_python_style_and_refusals():
    """START:END is 0-based with END excluded; negatives count from the end; empty ranges are refused
    with an OptionError naming the clip length."""
    m = _clip()
    assert np.array_equal(select_frames(m, 5, 10).rotations, m.rotations[5:10])
    assert np.array_equal(select_frames(m, None, -5).rotations, m.rotations[:-5])
    assert np.array_equal(select_frames(m, -3, None).rotations, m.rotations[-3:])
    with pytest.raises(OptionError, match="25-frame clip"):
        select_frames(m, 10, 10)
    with pytest.raises(OptionError, match="selects no frames"):
        select_frames(m, 0, 99)
