"""A clip library through the batch runner: isolation of bad clips, atomic outputs, resume, reports, the
command line, and a real dask.distributed cluster on loopback giving the same bytes as the local pool."""

from __future__ import annotations

import csv
import json
import shutil
from pathlib import Path

import pytest
from click.testing import CliRunner

from retarget.batch import MANIFEST_NAME, find_clips, plan_batch, run_batch
from retarget.cli import main
from retarget.errors import MappingError, RetargetError

REPO = Path(__file__).resolve().parents[1]
CAPTURE = REPO / "demo_clips" / "capture"
RIG = REPO / "demo_clips" / "rigs" / "brannoc_stocky.bvh"
MAPPING = REPO / "mappings" / "tallowmere_to_brannoc_stocky.yaml"
# Short takes keep the suite fast: the runner's behaviour does not depend on clip length.
TAKES = ["idle", "turn", "jog", "jump"]


def _short_copy(src: Path, dst: Path, frames: int = 60) -> None:
    """The first frames of a take, as a valid BVH (the header's frame count adjusted)."""
    head, body = src.read_text().split("Frame Time:", 1)
    ft, rest = body.split("\n", 1)
    lines = rest.splitlines()[:frames]
    head = head.replace(head[head.index("Frames:"):].splitlines()[0], f"Frames: {len(lines)}")
    dst.parent.mkdir(parents=True, exist_ok=True)
    dst.write_text(head + "Frame Time:" + ft + "\n" + "\n".join(lines) + "\n")


@pytest.fixture()
def library(tmp_path) -> Path:
    """30 clips in two folders, 3 of them (10%) corrupted in different ways."""
    lib = tmp_path / "library"
    k = 0
    for folder in ("day1", "day2/pickups"):
        for copy in range(4):
            for take in TAKES[: 4 if folder == "day1" else 3]:
                if k < 27:
                    _short_copy(CAPTURE / f"{take}.bvh", lib / folder / f"{take}_{copy}.bvh")
                k += 1
    good = (lib / "day1" / "idle_0.bvh").read_text()
    (lib / "day1" / "bad_truncated.bvh").write_text(good[: len(good) // 2])
    (lib / "day2" / "bad_nan.bvh").write_text(good.replace(good.splitlines()[-1], "nan " + good.splitlines()[-1]
                                                           .split(" ", 1)[1]))
    (lib / "day2" / "pickups" / "bad_text.bvh").write_text("this is not motion data\n")
    return lib


def _statuses(report):
    return {r.clip: r.status for r in report.rows}


def test_bad_clips_are_reported_and_good_ones_done(library, tmp_path):
    out = tmp_path / "out"
    jobs, prior = plan_batch([str(library)], RIG, out, mapping=MAPPING)
    report = run_batch(jobs, out, workers=2, prior_rows=prior, rig=str(RIG))
    status = _statuses(report)
    bad = {c for c in status if Path(c).name.startswith("bad_")}
    assert len(status) == 30 and len(bad) == 3
    assert all(status[c] == "done" for c in status if c not in bad)
    assert all(status[c] == "failed" for c in bad)
    errors = {r.clip: r.error for r in report.rows if r.status == "failed"}
    assert "truncated" in errors["day1/bad_truncated.bvh"]
    assert "not finite" in errors["day2/bad_nan.bvh"]
    assert "not a BVH file" in errors["day2/pickups/bad_text.bvh"]
    # Outputs mirror the input folders; nothing half written, no output for a failed clip.
    assert (out / "day2" / "pickups" / "idle_0.bvh").is_file()
    assert not list(out.rglob("*.part")) and not (out / "day1" / "bad_truncated.bvh").exists()
    # The report, machine and spreadsheet.
    data = json.loads((out / "batch_report.json").read_text())
    assert data["done"] == 27 and data["failed"] == 3
    rows = list(csv.DictReader((out / "batch_report.csv").open()))
    assert len(rows) == 30 and {r["status"] for r in rows} == {"done", "failed"}
    done = next(r for r in rows if r["status"] == "done")
    assert float(done["frames"]) == 60 and done["skate_after_cm_s"] != ""


def test_resume_does_only_the_remaining_clips(library, tmp_path):
    """Interrupt after a few clips (as Ctrl-C would), then run again: finished clips are skipped, only the
    rest runs; a changed option redoes everything."""
    out = tmp_path / "out"
    jobs, prior = plan_batch([str(library / "day1")], RIG, out, mapping=MAPPING)
    seen = []

    def stop_after_three(row):
        seen.append(row.clip)
        if len(seen) == 3:
            raise KeyboardInterrupt

    with pytest.raises(KeyboardInterrupt):
        run_batch(jobs, out, workers=1, on_row=stop_after_three, prior_rows=prior)
    first = json.loads((out / "batch_report.json").read_text())
    assert first["cancelled"] > 0 and not list(out.rglob("*.part"))
    finished = {r["clip"] for r in first["rows"] if r["status"] == "done"}
    assert len(finished) >= 2

    jobs2, prior2 = plan_batch([str(library / "day1")], RIG, out, mapping=MAPPING)
    assert {r.clip for r in prior2 if r.status == "skipped"} == finished
    assert {j.relative for j in jobs2}.isdisjoint(finished)
    report = run_batch(jobs2, out, workers=2, prior_rows=prior2)
    assert report.skipped == len(finished) and report.done + report.failed + report.skipped == report.clips

    jobs3, _ = plan_batch([str(library / "day1")], RIG, out, mapping=MAPPING, options={"in_place": True})
    assert len(jobs3) == report.clips  # the option is part of every clip's input hash


def test_one_mapping_per_skeleton_and_other_skeletons_matched_on_their_own(tmp_path, real_clips):
    lib = tmp_path / "mixed"
    _short_copy(CAPTURE / "walk.bvh", lib / "walk_a.bvh")
    _short_copy(CAPTURE / "jog.bvh", lib / "jog_a.bvh")
    other = next(c for c in real_clips if c.name == "walk_a_cmu43.bvh")
    _short_copy(other, lib / "real_walk.bvh", frames=120)
    jobs, prior = plan_batch([str(lib)], RIG, tmp_path / "out", mapping=MAPPING)
    notes = {j.relative: j.mapping_note for j in jobs}
    assert notes["walk_a.bvh"].startswith("given") and notes["jog_a.bvh"] == notes["walk_a.bvh"]
    assert notes["real_walk.bvh"].startswith("own match")
    report = run_batch(jobs, tmp_path / "out", workers=2, prior_rows=prior)
    assert report.done == 3


def test_a_broken_mapping_for_this_skeleton_stops_before_starting(tmp_path):
    broken = tmp_path / "broken.yaml"
    broken.write_text(MAPPING.read_text().replace("target: knee_l", "target: knee_left"))
    lib = tmp_path / "lib"
    _short_copy(CAPTURE / "idle.bvh", lib / "idle.bvh")
    with pytest.raises(MappingError, match="knee_left"):
        plan_batch([str(lib)], RIG, tmp_path / "out", mapping=broken)


def test_two_clips_that_would_share_an_output_are_refused(tmp_path):
    for day in ("a", "b"):
        _short_copy(CAPTURE / "idle.bvh", tmp_path / day / "idle.bvh", frames=10)
    with pytest.raises(RetargetError, match="same output"):
        find_clips([str(tmp_path / "a"), str(tmp_path / "b")])
    assert len(find_clips([str(tmp_path)])) == 2  # their common parent keeps them apart


def test_missing_mapping_file_is_a_clear_error(tmp_path):
    lib = tmp_path / "lib"
    _short_copy(CAPTURE / "idle.bvh", lib / "idle.bvh", frames=10)
    r = CliRunner().invoke(main, ["batch", str(lib), "--rig", str(RIG), "-m", str(tmp_path / "no.yaml"),
                                  "-o", str(tmp_path / "out")])
    assert r.exit_code == 2 and "mapping file not found" in r.output and "Traceback" not in r.output


def test_inputs_that_name_nothing(tmp_path):
    (tmp_path / "empty").mkdir()
    with pytest.raises(RetargetError, match="no clips"):
        find_clips([str(tmp_path / "empty")])
    with pytest.raises(RetargetError, match="no clips match"):
        find_clips([str(tmp_path / "*.bvh")])


def test_cli_batch_summary_exit_code_and_glob(library, tmp_path):
    out = tmp_path / "out"
    r = CliRunner().invoke(main, ["batch", str(library / "day2" / "**" / "*.bvh"), "--rig", str(RIG),
                                  "-m", str(MAPPING), "-o", str(out), "--workers", "2", "--quiet"])
    assert r.exit_code == 1, r.output  # some clips failed
    assert "done" in r.output and "2 failed" in r.output and "bad_nan.bvh" in r.output
    assert (out / "pickups" / "idle_0.bvh").is_file()
    r2 = CliRunner().invoke(main, ["batch", str(library / "day1" / "idle_*.bvh"), "--rig", str(RIG),
                                   "-o", str(tmp_path / "out2"), "--quiet", "--no-contact-fix"])
    assert r2.exit_code == 0, r2.output
    assert "4 done" in r2.output
    r3 = CliRunner().invoke(main, ["batch", str(tmp_path / "nothing"), "--rig", str(RIG), "-o", str(out)])
    assert r3.exit_code == 2 and r3.output.startswith("error: ")


def test_dask_cluster_gives_the_same_bytes_as_the_local_pool(tmp_path):
    """A real dask.distributed LocalCluster (two worker processes on loopback) through the same code."""
    distributed = pytest.importorskip("dask.distributed")
    lib = tmp_path / "lib"
    for take in TAKES:
        _short_copy(CAPTURE / f"{take}.bvh", lib / f"{take}.bvh", frames=40)
    local_out, dask_out = tmp_path / "local", tmp_path / "dask"
    jobs, prior = plan_batch([str(lib)], RIG, local_out)
    run_batch(jobs, local_out, workers=2, prior_rows=prior)
    with distributed.LocalCluster(n_workers=2, threads_per_worker=1, processes=True, host="127.0.0.1",
                                  dashboard_address=None) as cluster, distributed.Client(cluster) as client:
        jobs_d, prior_d = plan_batch([str(lib)], RIG, dask_out)
        report = run_batch(jobs_d, dask_out, executor=client.get_executor(), prior_rows=prior_d)
    assert report.done == len(TAKES)
    for take in TAKES:
        assert (local_out / f"{take}.bvh").read_bytes() == (dask_out / f"{take}.bvh").read_bytes()
    manifest_local = json.loads((local_out / MANIFEST_NAME).read_text())
    assert manifest_local == json.loads((dask_out / MANIFEST_NAME).read_text())


def test_gltf_rig_writes_gltf(tmp_path):
    glb = RIG.with_suffix(".glb")
    if not glb.exists():
        pytest.skip("glTF demo rig absent")
    lib = tmp_path / "lib"
    _short_copy(CAPTURE / "idle.bvh", lib / "idle.bvh", frames=20)
    jobs, prior = plan_batch([str(lib)], glb, tmp_path / "out")
    report = run_batch(jobs, tmp_path / "out", workers=1, prior_rows=prior)
    assert report.done == 1 and (tmp_path / "out" / "idle.glb").is_file()


def test_previews_beside_outputs(tmp_path):
    lib = tmp_path / "lib"
    _short_copy(CAPTURE / "walk.bvh", lib / "walk.bvh", frames=30)
    jobs, prior = plan_batch([str(lib)], RIG, tmp_path / "out", previews=True)
    report = run_batch(jobs, tmp_path / "out", workers=1, prior_rows=prior)
    page = tmp_path / "out" / "walk.html"
    assert report.rows[0].preview == str(page) and page.read_text().startswith("<!DOCTYPE html>")


def test_ctrl_c_stops_cleanly_and_writes_the_report(library, tmp_path):
    """A real SIGINT to the command while clips run: exit 130, a report with cancelled clips, no partial
    file."""
    import os
    import signal
    import subprocess
    import sys
    import time

    out = tmp_path / "out"
    # Full-length takes, enough that one worker needs several seconds: the signal lands mid-run.
    for k in range(24):
        shutil.copy(CAPTURE / "walk.bvh", library / "day1" / f"long_{k:02d}.bvh")
    proc = subprocess.Popen([sys.executable, "-m", "retarget.cli", "batch", str(library), "--rig", str(RIG),
                             "-m", str(MAPPING), "-o", str(out), "--workers", "1", "--quiet"],
                            cwd=REPO, stdout=subprocess.PIPE, stderr=subprocess.PIPE, start_new_session=True)
    deadline = time.time() + 60
    while not (out / MANIFEST_NAME).exists() and time.time() < deadline and proc.poll() is None:
        time.sleep(0.05)
    assert proc.poll() is None, "the batch ended before it could be interrupted"
    os.killpg(proc.pid, signal.SIGINT)  # the whole group, as a terminal's Ctrl-C does
    _, err = proc.communicate(timeout=60)
    assert proc.returncode == 130, err
    data = json.loads((out / "batch_report.json").read_text())
    assert data["cancelled"] > 0 and data["done"] >= 1
    assert not list(out.rglob("*.part"))
