"""A clip library through any concurrent.futures.Executor, resumable, with a per-clip report.

The main process plans: it finds the clips, groups them by source skeleton, matches (or loads) one
mapping per skeleton, and skips clips whose output is up to date. Workers run one clip each, end to
end, and write their output atomically. A bad clip becomes a failed row; it never stops the others.
"""

from __future__ import annotations

import csv
import functools
import glob
import hashlib
import io
import json
import os
import time
from concurrent.futures import Executor, Future, ProcessPoolExecutor, wait, FIRST_COMPLETED
from dataclasses import dataclass
from pathlib import Path
from typing import Any, Callable, Iterable

from pydantic import BaseModel

from .errors import MappingError, OptionError, RetargetError
from .io.atomic import atomic_write

__all__ = ["ClipJob", "ClipRow", "BatchReport", "find_clips", "plan_batch", "run_batch", "write_batch_report",
           "CLIP_SUFFIXES", "MANIFEST_NAME"]

CLIP_SUFFIXES = (".bvh",)
MANIFEST_NAME = ".retarget-batch.json"
REPORT_JSON = "batch_report.json"
REPORT_CSV = "batch_report.csv"
_HASH_VERSION = "1"


@dataclass(frozen=True)
class ClipJob:
    """One clip to retarget: everything a worker needs, picklable.

    mapping: the Mapping to use (shared by every clip of one source skeleton), or None to let the worker
    match on its own (a clip whose skeleton the given mapping does not fit).
    """

    clip: str
    relative: str
    output: str
    rig: str
    mapping: Any
    options: dict
    input_hash: str
    mapping_note: str = ""
    preview: str | None = None


class ClipRow(BaseModel):
    """One line of the batch report."""

    clip: str
    output: str
    status: str  # "done", "skipped", "failed", "cancelled"
    frames: int | None = None
    seconds: float | None = None
    pose_error_mean_deg: float | None = None
    pose_error_max_deg: float | None = None
    skate_before_cm_s: float | None = None
    skate_after_cm_s: float | None = None
    penetration_before_cm: float | None = None
    penetration_after_cm: float | None = None
    mapping: str = ""
    preview: str | None = None
    warnings: list[str] = []
    error: str | None = None


class BatchReport(BaseModel):
    rig: str
    output_folder: str
    clips: int
    done: int
    skipped: int
    failed: int
    cancelled: int
    seconds: float
    rows: list[ClipRow]


# ----- planning --------------------------------------------------------------------------------------

def find_clips(inputs: Iterable[str]) -> list[tuple[Path, Path]]:
    """Clips named by folders (searched recursively) or glob patterns: [(path, path relative to its
    input root)], sorted and without duplicates. RetargetError when an input names nothing."""
    found: dict[Path, Path] = {}
    for spec in inputs:
        p = Path(spec)
        if p.is_dir():
            hits = sorted(q for q in p.rglob("*") if q.suffix.lower() in CLIP_SUFFIXES and q.is_file())
            if not hits:
                raise RetargetError(f"no clips ({', '.join(CLIP_SUFFIXES)}) in this folder", path=str(p))
            for q in hits:
                found.setdefault(q.resolve(), q.relative_to(p))
        elif p.is_file():
            found.setdefault(p.resolve(), Path(p.name))
        else:
            hits = sorted(Path(q) for q in glob.glob(spec, recursive=True))
            hits = [q for q in hits if q.is_file() and q.suffix.lower() in CLIP_SUFFIXES]
            if not hits:
                raise RetargetError("no clips match this path or pattern", path=spec)
            root = Path(glob.escape(spec)).parent if not glob.has_magic(spec) else _glob_root(spec)
            for q in hits:
                try:
                    rel = q.relative_to(root)
                except ValueError:
                    rel = Path(q.name)
                found.setdefault(q.resolve(), rel)
    by_name: dict[Path, Path] = {}
    for path, rel in found.items():
        other = by_name.setdefault(rel.with_suffix(""), path)
        if other != path:
            raise RetargetError(f"two clips would write the same output {rel.with_suffix('')}: {other} and "
                                f"{path}; give their common parent folder instead", path=str(path))
    return sorted(((path, rel) for path, rel in found.items()), key=lambda t: str(t[1]))


def _glob_root(pattern: str) -> Path:
    parts = Path(pattern).parts
    root: list[str] = []
    for part in parts:
        if glob.has_magic(part):
            break
        root.append(part)
    return Path(*root) if root else Path(".")


def _made_for(mapping_text: str, skeleton) -> bool:
    """Whether a mapping file names this skeleton as its source (by hierarchy signature, or by joint
    names when the file carries no signature)."""
    import yaml

    from .mapping import hierarchy_signature

    try:
        data = yaml.safe_load(mapping_text)
    except yaml.YAMLError:
        return True
    if not isinstance(data, dict):
        return True
    sig = data.get("source_signature")
    if sig:
        return sig == hierarchy_signature(skeleton)
    names = {str(p.get("source")) for p in data.get("pairs") or [] if isinstance(p, dict)}
    return bool(names) and names <= set(skeleton.names)


def _sha(*chunks: bytes) -> str:
    h = hashlib.sha256()
    for c in chunks:
        h.update(hashlib.sha256(c).digest())
    return h.hexdigest()


def _output_path(out_dir: Path, relative: Path, rig: Path, suffix: str | None) -> Path:
    ext = suffix or (rig.suffix.lower() if rig.suffix.lower() in (".gltf", ".glb") else ".bvh")
    return (out_dir / relative).with_suffix(ext)


def _previous_rows(out_dir: Path) -> dict[str, "ClipRow"]:
    """Rows of the last report in the folder (done clips only), so skipped clips keep their figures."""
    try:
        data = json.loads((out_dir / REPORT_JSON).read_text())
        return {r["clip"]: ClipRow(**r) for r in data.get("rows", []) if r.get("status") in ("done", "skipped")}
    except (FileNotFoundError, ValueError, TypeError, KeyError):
        return {}


def _load_manifest(out_dir: Path) -> dict[str, str]:
    try:
        return json.loads((out_dir / MANIFEST_NAME).read_text())
    except (FileNotFoundError, ValueError):
        return {}


def plan_batch(inputs: Iterable[str], rig: str | os.PathLike, out_dir: str | os.PathLike,
               mapping: str | os.PathLike | None = None, options: dict | None = None, force: bool = False,
               output_suffix: str | None = None, previews: bool = False) -> tuple[list[ClipJob], list[ClipRow]]:
    """Find the clips, settle one mapping per source skeleton and decide what needs doing.

    options: retarget_clip options for every clip. previews: also write a preview page (.html) beside
    each output.

    Returns (jobs to run, rows for clips skipped as up to date or refused while planning).
    """
    from .io import read_motion, read_skeleton
    from .mapping import format_mapping, load_mapping
    from .match import match

    rig = Path(rig)
    out_dir = Path(out_dir)
    options = dict(options or {})
    clips = find_clips(inputs)
    rig_motion = read_motion(rig)
    rig_bytes = rig.read_bytes()
    opts_bytes = json.dumps(options, sort_keys=True, default=str).encode()
    manifest = {} if force else _load_manifest(out_dir)
    previous = {} if force else _previous_rows(out_dir)
    user_mapping_text = None
    if mapping is not None:
        try:
            user_mapping_text = Path(mapping).read_text(encoding="utf-8")
        except FileNotFoundError:
            raise MappingError("mapping file not found", path=str(mapping)) from None
        except (OSError, UnicodeDecodeError) as exc:
            raise MappingError(f"cannot read the mapping file: {exc}", path=str(mapping)) from None

    groups: dict[str, tuple[Any, str]] = {}  # skeleton signature -> (Mapping or None, note)
    group_hash: dict[str, bytes] = {}  # skeleton signature -> digest of its mapping's text
    jobs: list[ClipJob] = []
    rows: list[ClipRow] = []
    for path, rel in clips:
        out = _output_path(out_dir, rel, rig, output_suffix)
        try:
            skeleton = read_skeleton(path)
        except RetargetError as exc:
            rows.append(ClipRow(clip=str(rel), output=str(out), status="failed", error=str(exc)))
            continue
        sig = skeleton.signature
        if sig not in groups:
            if user_mapping_text is not None:
                try:
                    m = load_mapping(mapping, skeleton, rig_motion.skeleton)
                    groups[sig] = (m, f"given ({Path(mapping).name})")
                except MappingError:
                    if _made_for(user_mapping_text, skeleton):
                        raise  # the mapping was made for this skeleton: it is broken, say so before starting
                    # Another skeleton: its clips are matched on their own, and the report says so.
                    groups[sig] = (None, "own match: the given mapping was made for another skeleton")
            else:
                try:
                    clip_motion = read_motion(path)
                    m = match(skeleton, rig_motion.skeleton, clip_motion, rig_motion)
                    groups[sig] = (m, f"matched once for skeleton {sig[:8]}")
                except RetargetError as exc:
                    rows.append(ClipRow(clip=str(rel), output=str(out), status="failed", error=str(exc)))
                    continue
        group_mapping, note = groups[sig]
        if sig not in group_hash:
            text = "" if group_mapping is None else format_mapping(group_mapping)
            group_hash[sig] = hashlib.sha256(text.encode()).digest()
        digest = _sha(_HASH_VERSION.encode(), path.read_bytes(), rig_bytes, group_hash[sig], opts_bytes)
        key = str(out.relative_to(out_dir))
        page = str(out.with_suffix(".html")) if previews else None
        if not force and out.exists() and manifest.get(key) == digest and (page is None or Path(page).exists()):
            before = previous.get(str(rel))
            row = before.model_copy(update={"status": "skipped"}) if before else ClipRow(
                clip=str(rel), output=str(out), status="skipped", mapping=note)
            rows.append(row)
            continue
        jobs.append(ClipJob(str(path), str(rel), str(out), str(rig), group_mapping, options, digest, note, page))
    return jobs, rows


# ----- running ---------------------------------------------------------------------------------------

@functools.lru_cache(maxsize=4)
def _read_rig(path: str, mtime_ns: int):
    """The rig, read once per worker process (and again if the file changes)."""
    from .io import read_motion

    return read_motion(path)


def process_clip(job: ClipJob) -> ClipRow:
    """Run one clip end to end (in a worker). Never raises for a bad clip: the row says what failed."""
    t0 = time.perf_counter()
    row = ClipRow(clip=job.relative, output=job.output, status="failed", mapping=job.mapping_note)
    try:
        from .io import read_motion, write_motion
        from .pipeline import retarget_clip

        clip = read_motion(job.clip)
        rig = _read_rig(job.rig, os.stat(job.rig).st_mtime_ns)
        result = retarget_clip(clip, rig, mapping=job.mapping, **job.options)
        Path(job.output).parent.mkdir(parents=True, exist_ok=True)
        template = job.rig if Path(job.rig).suffix.lower() in (".gltf", ".glb") else None
        write_motion(job.output, result.motion, template=template)
        if job.preview:
            from .preview import write_result_preview

            write_result_preview(job.preview, clip, result, title=f"{Path(job.clip).name} \u2192 {Path(job.rig).name}")
            row.preview = job.preview
        row.status = "done"
        row.frames = result.motion.num_frames
        _fill_figures(row, result.report)
    except RetargetError as exc:
        row.error = str(exc)
    except Exception as exc:  # a bug or an unexpected input must not stop the batch
        row.error = f"unexpected {type(exc).__name__}: {exc}"
    row.seconds = round(time.perf_counter() - t0, 4)
    return row


def _fill_figures(row: ClipRow, report: Any) -> None:
    """Copy the per-clip figures of a RetargetReport into a report row, to 4 decimals (degrees, cm)."""

    def r4(x):
        return None if x is None else round(float(x), 4)

    row.pose_error_mean_deg = r4(report.direction_error_mean_deg)
    row.pose_error_max_deg = r4(report.direction_error_max_deg)
    overall = report.contacts.overall if report.contacts is not None else None
    if overall is not None:
        row.skate_before_cm_s = r4(overall.skate_before_cm_s)
        row.skate_after_cm_s = r4(overall.skate_after_cm_s)
        row.penetration_before_cm = r4(overall.penetration_before_cm)
        row.penetration_after_cm = r4(overall.penetration_after_cm)
    row.warnings = list(report.warnings)


def run_batch(jobs: list[ClipJob], out_dir: str | os.PathLike, executor: Executor | None = None,
              workers: int | None = None, on_row: Callable[[ClipRow], None] | None = None,
              prior_rows: list[ClipRow] | None = None, rig: str = "") -> BatchReport:
    """Run the jobs through ``executor`` (a local process pool of ``workers`` when None).

    on_row is called in the main process as each clip ends (progress). The manifest used for resuming is
    updated after every finished clip; the report is written at the end, also after Ctrl-C (then the
    clips not run are marked cancelled and KeyboardInterrupt is raised again).
    """
    out_dir = Path(out_dir)
    out_dir.mkdir(parents=True, exist_ok=True)
    t0 = time.perf_counter()
    rows: dict[str, ClipRow] = {}
    manifest = _load_manifest(out_dir)
    own = executor is None
    if own:
        if workers is not None and workers < 1:
            raise OptionError(f"workers must be at least 1, got {workers}")
        executor = ProcessPoolExecutor(max_workers=workers or os.cpu_count() or 1)
    futures: dict[Future, ClipJob] = {}
    interrupted = False
    saved = float("-inf")
    try:
        for job in jobs:
            futures[executor.submit(process_clip, job)] = job
        pending = set(futures)
        while pending:
            done, pending = wait(pending, return_when=FIRST_COMPLETED)
            for fut in done:
                job = futures[fut]
                try:
                    row = fut.result()
                except BaseException as exc:  # the worker itself died (killed, out of memory...)
                    row = ClipRow(clip=job.relative, output=job.output, status="failed",
                                  mapping=job.mapping_note, error=f"worker failed: {type(exc).__name__}: {exc}")
                rows[job.relative] = row
                if row.status == "done":
                    manifest[str(Path(job.output).relative_to(out_dir))] = job.input_hash
                    # At most once a second (and once at the end): a big library must not rewrite it
                    # after every clip.
                    if time.perf_counter() - saved >= 1.0:
                        _save_manifest(out_dir, manifest)
                        saved = time.perf_counter()
                if on_row:
                    on_row(row)
    except KeyboardInterrupt:
        interrupted = True
        for fut in futures:
            fut.cancel()
    finally:
        if own:
            executor.shutdown(wait=True, cancel_futures=True)
        _save_manifest(out_dir, manifest)
    for job in jobs:
        if job.relative not in rows:
            rows[job.relative] = ClipRow(clip=job.relative, output=job.output, status="cancelled",
                                         mapping=job.mapping_note)
    all_rows = sorted(list(prior_rows or []) + list(rows.values()), key=lambda r: r.clip)
    report = BatchReport(
        rig=str(rig), output_folder=str(out_dir), clips=len(all_rows),
        done=sum(r.status == "done" for r in all_rows), skipped=sum(r.status == "skipped" for r in all_rows),
        failed=sum(r.status == "failed" for r in all_rows),
        cancelled=sum(r.status == "cancelled" for r in all_rows),
        seconds=round(time.perf_counter() - t0, 3), rows=all_rows)
    write_batch_report(report, out_dir)
    if interrupted:
        raise KeyboardInterrupt
    return report


def _save_manifest(out_dir: Path, manifest: dict[str, str]) -> None:
    atomic_write(out_dir / MANIFEST_NAME, json.dumps(manifest, indent=1, sort_keys=True).encode())


_CSV_FIELDS = ["clip", "output", "status", "frames", "seconds", "pose_error_mean_deg", "pose_error_max_deg",
               "skate_before_cm_s", "skate_after_cm_s", "penetration_before_cm", "penetration_after_cm",
               "mapping", "preview", "warnings", "error"]


def write_batch_report(report: BatchReport, out_dir: str | os.PathLike) -> tuple[Path, Path]:
    """batch_report.json (machine) and batch_report.csv (spreadsheet), atomically."""
    out_dir = Path(out_dir)
    j = atomic_write(out_dir / REPORT_JSON, report.model_dump_json(indent=2).encode())
    buf = io.StringIO()
    w = csv.DictWriter(buf, fieldnames=_CSV_FIELDS)
    w.writeheader()
    for r in report.rows:
        d = r.model_dump()
        d["warnings"] = "; ".join(d["warnings"])
        w.writerow({k: ("" if d[k] is None else d[k]) for k in _CSV_FIELDS})
    c = atomic_write(out_dir / REPORT_CSV, buf.getvalue().encode())
    return j, c
