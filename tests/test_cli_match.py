"""`retarget match` as a user meets it: the table, the file, JSON, and one-line errors with exit 2."""

from __future__ import annotations

import json
from pathlib import Path

import numpy as np
import pytest
import yaml
from click.testing import CliRunner

from family import make_variant
from retarget import Motion
from retarget.cli import main
from retarget.io import write_bvh


@pytest.fixture()
def files(tmp_path):
    a, _ = make_variant("camel_left", fingers=True, units="cm", up="+Z", forward="-Y")
    b, _ = make_variant("snake", spine=2, twist="leaf", pose="A")
    pa = write_bvh(tmp_path / "capture.bvh", Motion.rest(a, 2))
    pb = write_bvh(tmp_path / "rig.bvh", Motion.rest(b, 1))
    return pa, pb


def test_match_prints_a_table_and_writes_the_file(files, tmp_path):
    pa, pb = files
    out = tmp_path / "capture_to_rig.yaml"
    r = CliRunner().invoke(main, ["match", str(pa), str(pb), "-o", str(out)])
    assert r.exit_code == 0, r.output
    assert "source joint" in r.output and "target joint" in r.output and "sure" in r.output
    assert "  Hips " in r.output and " pelvis " in r.output
    assert "unmapped in the source" in r.output and "finger with no counterpart" in r.output
    assert f"mapping written to {out}" in r.output
    data = yaml.safe_load(out.read_text())
    assert {"source": "LeftUpperLeg", "target": "thigh_l"} in [
        {"source": p["source"], "target": p["target"]} for p in data["pairs"]]


def test_low_confidence_pairs_are_marked(tmp_path):
    """Side-free names and no end sites: nothing tells left from right; sided pairs get '!'."""
    a, truth = make_variant("snake", toes=False)
    plain = [truth[n].replace("_l", "_1").replace("_r", "_2") for n in a.names]
    a = a.renamed(plain).with_rest(tips=np.full((a.num_joints, 3), np.nan))
    p = write_bvh(tmp_path / "plain.bvh", Motion.rest(a, 1))
    r = CliRunner().invoke(main, ["match", str(p), str(p)])
    assert r.exit_code == 0, r.output
    marked = [ln for ln in r.output.splitlines() if ln.startswith("! ")]
    assert marked and all("left/right undecided" in ln for ln in marked)
    assert any(ln.startswith("  pelvis ") for ln in r.output.splitlines())


def test_json_output(files):
    pa, pb = files
    r = CliRunner().invoke(main, ["match", str(pa), str(pb), "--json"])
    assert r.exit_code == 0, r.output
    data = json.loads(r.output)
    assert data["pairs"] and {"source", "target", "confidence", "reason"} <= set(data["pairs"][0])
    assert {u["side"] for u in data["unmapped"]} <= {"source", "target"}


def test_errors_are_one_line_and_exit_2(files, tmp_path):
    pa, _ = files
    r = CliRunner().invoke(main, ["match", str(pa), str(tmp_path / "missing.bvh")])
    assert r.exit_code == 2 and r.output.count("\n") == 1 and "Traceback" not in r.output
    data = Path(__file__).parent / "data" / "mixed.bvh"  # a skeleton with one leg
    r = CliRunner().invoke(main, ["match", str(pa), str(data), "-o", str(tmp_path / "m.yaml")])
    assert r.exit_code == 2 and "no legs found" in r.output and str(data) in r.output
    assert not (tmp_path / "m.yaml").exists()
