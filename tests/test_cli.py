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


def test_contacts_prints_timeline_and_numbers():
    take = Path(__file__).resolve().parents[1] / "demo_clips" / "capture" / "box_step.bvh"
    r = CliRunner().invoke(main, ["contacts", str(take), "--width", "60"])
    assert r.exit_code == 0, r.output
    lines = r.output.splitlines()
    strips = [line for line in lines if line.startswith(("left ", "right ")) and "%" not in line]
    assert len(strips) == 2 and all(len(s.split()[1]) == 60 for s in strips)
    assert set("".join(s.split()[1] for s in strips)) <= set("#+.")
    assert "on  +30.9 cm" in r.output  # the box top (30 cm box, demo_clips/README.md) over a 0.9 cm floor


def test_contacts_json_lists_spans_per_foot():
    take = Path(__file__).resolve().parents[1] / "demo_clips" / "capture" / "walk.bvh"
    r = CliRunner().invoke(main, ["contacts", str(take), "--json"])
    data = json.loads(r.output)
    assert [f["foot"] for f in data["feet"]] == ["left", "right"]
    assert data["frames"] == 518 and data["fps"] == 120
    left = data["feet"][0]
    assert left["contacts"] == len(left["spans"]) and left["contact_frames"] == sum(
        s["stop"] - s["start"] for s in left["spans"])


def test_contacts_on_a_file_without_legs_is_one_line_exit_2():
    r = CliRunner().invoke(main, ["contacts", str(DATA / "mixed.bvh")])
    assert r.exit_code == 2 and r.output.count("\n") == 1 and "no legs" in r.output


def test_apply_runs_without_loading_scipy(tmp_path):
    """A whole `apply` (read, transfer, foot contacts, write) needs only numpy: scipy alone costs about
    half a second of start-up on every run and every batch worker."""
    demo = Path(__file__).resolve().parents[1]
    code = ("import sys; from retarget.cli import main\n"
            "try:\n    main(sys.argv[1:])\nexcept SystemExit as e:\n    assert not e.code, e.code\n"
            "print([m for m in sys.modules if m == 'scipy' or m.startswith('scipy.')][:3])")
    args = ["apply", str(demo / "demo_clips" / "capture" / "walk.bvh"), "--rig",
            str(demo / "demo_clips" / "rigs" / "brannoc_stocky.bvh"), "-m",
            str(demo / "mappings" / "tallowmere_to_brannoc_stocky.yaml"), "-o", str(tmp_path / "out.bvh")]
    out = subprocess.run([sys.executable, "-c", code, *args], capture_output=True, text=True, check=True).stdout
    assert out.strip().splitlines()[-1] == "[]"
    assert (tmp_path / "out.bvh").exists()
