"""Every real recorded clip (outside the project; skipped when absent) reads, inspects and round-trips,
and our reader agrees with bvhio on the first frames."""

from __future__ import annotations

import numpy as np
from click.testing import CliRunner

from retarget.cli import main
from retarget.describe import summarize
from retarget.io import read_bvh, write_bvh


def test_every_real_clip_reads_inspects_and_round_trips(real_clips, tmp_path):
    for path in real_clips:
        m = read_bvh(path)
        s = summarize(m)
        assert s.frames == m.num_frames > 0
        back = read_bvh(write_bvh(tmp_path / path.name, m))
        pos, pos2 = m.global_transforms()[1], back.global_transforms()[1]
        height = np.ptp(pos[0] @ np.array([0.0, 1.0, 0.0])) or 1.0
        assert np.abs(pos2 - pos).max() <= 1e-6 * np.ptp(pos[..., 1]), path.name
        assert height > 0


def test_real_clips_agree_with_bvhio(real_clips):
    """bvhio (float32 inside) is the independent reader: positions within 1e-3 file units on 3 frames."""
    import bvhio

    for path in real_clips[:4]:
        m = read_bvh(path)
        ref = bvhio.readAsHierarchy(str(path))
        pos = m.global_transforms()[1]
        for f in (0, m.num_frames // 2, m.num_frames - 1):
            ref.loadPose(f)
            for joint, _, _ in ref.layout():
                j = m.skeleton.index(joint.Name)
                np.testing.assert_allclose(pos[f, j], np.array(joint.PositionWorld), atol=1e-3,
                                           err_msg=f"{path.name} frame {f} {joint.Name}")


def test_inspect_runs_on_every_real_clip(real_clips):
    for path in real_clips:
        r = CliRunner().invoke(main, ["inspect", str(path)])
        assert r.exit_code == 0, (path.name, r.output)
        assert "chains" in r.output
