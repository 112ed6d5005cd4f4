"""The command line as a user meets it: output, exit codes, one-line errors without tracebacks."""

from __future__ import annotations

import json
import subprocess
import sys
from pathlib import Path

from click.testing import CliRunner

from retarget.cli import main

DATA = Path(__file__).parent / "data"


def test_inspect_prints_tree_chains_and_convention():
    r = CliRunner().invoke(main, ["inspect", str(DATA / "mixed.bvh")])
    assert r.exit_code == 0, r.output
    assert "pelvis  [Xp Yp Zp Zr Yr Xr]" in r.output
    assert "    spine  [Xr Yr Zr]" in r.output
    assert "frames       3 at 30 fps" in r.output
    # The file has one leg: the layout is refused with the reason, the rest is still shown.
    assert "no body layout: no legs found" in r.output


def test_inspect_json_is_machine_readable():
    r = CliRunner().invoke(main, ["inspect", str(DATA / "mixed.bvh"), "--json"])
    data = json.loads(r.output)
    assert data["joint_count"] == 7 and data["frames"] == 3
    assert data["convention"]["units"] == "unknown" and data["layout_problem"].startswith("no legs")


def test_bad_file_is_one_line_exit_2(tmp_path):
    bad = tmp_path / "cut.bvh"
    bad.write_text((DATA / "mixed.bvh").read_text().replace("Frames: 3", "Frames: 9"))
    r = CliRunner().invoke(main, ["inspect", str(bad)])
    assert r.exit_code == 2
    assert r.output.count("\n") == 1 and "truncated" in r.output and str(bad) in r.output
    assert "Traceback" not in r.output


def test_bad_axis_override_is_reported():
    r = CliRunner().invoke(main, ["inspect", str(DATA / "mixed.bvh"), "--up", "W"])
    assert r.exit_code == 2 and "axis must be one of" in r.output


def test_console_entry_starts_quickly_without_heavy_imports():
    """The CLI module must not pull in networkx, dask, matplotlib, pygltflib or scipy at start-up."""
    code = ("import sys, retarget.cli; heavy = [m for m in ('networkx', 'dask', 'matplotlib', 'pygltflib', "
            "'scipy') if m in sys.modules]; print(heavy)")
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True).stdout
    assert out.strip() == "[]"
