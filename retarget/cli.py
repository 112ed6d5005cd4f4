"""Command line: thin click commands over the public API.

Every RetargetError becomes one line on stderr and exit status 2; no traceback.
"""

from __future__ import annotations

import functools
import json
import sys
import time

import click

from .errors import OptionError, RetargetError


def _friendly(func):
    """Turn library errors into one clear line and exit 2."""

    @functools.wraps(func)
    def wrapper(*args, **kwargs):
        try:
            return func(*args, **kwargs)
        except RetargetError as exc:
            click.echo(f"error: {exc}", err=True)
            sys.exit(2)
        except KeyboardInterrupt:
            click.echo("interrupted", err=True)
            sys.exit(130)

    return wrapper


@click.group(context_settings={"help_option_names": ["-h", "--help"]})
@click.version_option(package_name="retarget")
def main() -> None:
    """Put capture takes onto differently built character rigs."""


def _axis_option(name: str, help_text: str):
    return click.option(name, default=None, metavar="AXIS", help=help_text)


def _reading_options(func):
    """--fps, --up, --forward and --unit-scale: how to read one file."""
    for opt in reversed([
        click.option("--fps", type=float, default=None, help="Override the file's frame rate."),
        _axis_option("--up", "Override the detected up axis (+X, -Y, ...)."),
        _axis_option("--forward", "Override the detected forward axis."),
        click.option("--unit-scale", type=float, default=None, metavar="M", help="Override metres per file unit."),
    ]):
        func = opt(func)
    return func


def _read_with_convention(path: str, fps, up, forward, unit_scale):
    """The clip, its body layout and its convention with the user's overrides (options checked first)."""
    from .chains import analyze_body
    from .convention import detect_convention, parse_axis
    from .io import read_motion

    up, forward = (parse_axis(a) if a else None for a in (up, forward))
    motion = read_motion(path, fps=fps)
    body = analyze_body(motion.skeleton, motion)
    return motion, body, detect_convention(motion.skeleton, motion, body).with_overrides(up, forward, unit_scale)


def _rig_options(func):
    """--rig and -m/--mapping, as every command that retargets takes them."""
    func = click.option("-m", "--mapping", default=None, type=click.Path(dir_okay=False),
                        help="Reviewed joint mapping file (YAML); proposed from the two skeletons when "
                             "left out.")(func)
    return click.option("--rig", required=True, type=click.Path(dir_okay=False),
                        help="The character rig: a BVH file (its zero pose is the rest pose) or a glTF "
                             "file (.gltf/.glb).")(func)


@main.command("inspect")
@click.argument("file", type=click.Path(dir_okay=False))
@click.option("--json", "as_json", is_flag=True, help="Print the summary as JSON.")
@_reading_options
@_friendly
def inspect_cmd(file: str, as_json: bool, fps: float | None, up: str | None, forward: str | None,
                unit_scale: float | None) -> None:
    """Summarise a clip or rig: joint tree, chains, convention, rest pose, frames, static joints."""
    from .convention import parse_axis
    from .describe import summarize
    from .errors import SkeletonError
    from .io import read_motion

    try:
        motion, _, conv = _read_with_convention(file, fps, up, forward, unit_scale)
    except SkeletonError:
        # No body layout: summarize still shows the hierarchy and says why.
        parse_axis(up or "+Y"), parse_axis(forward or "+Z")
        motion, conv = read_motion(file, fps=fps), None
    summary = summarize(motion, conv)
    if as_json:
        click.echo(json.dumps(summary.model_dump(), indent=2))
        return
    click.echo(_format_summary(summary))


def _format_summary(s) -> str:
    c = s.convention
    out = [f"{s.file}", ""]
    out.append(f"joints       {s.joint_count} (+{s.end_sites} end sites)")
    out.append(f"frames       {s.frames} at {s.fps:g} fps = {s.duration_s:.2f} s")
    arm = "" if s.arm_angle_deg is None else f" (upper arms {s.arm_angle_deg:+.0f} deg from horizontal)"
    out.append(f"rest pose    {s.rest_pose}{arm}")
    unit = c.units if c.metres_per_unit is None else f"{c.units} ({c.metres_per_unit:g} m per unit)"
    out.append(f"up           {c.up}  (sure: {c.up_confidence:.2f})")
    out.append(f"facing       {c.forward}  (sure: {c.forward_confidence:.2f}, from {c.forward_evidence})")
    height = "" if c.height_file_units is None else f", figure {c.height_file_units:.3g} units tall"
    out.append(f"units        {unit}{height}")
    out.append(f"read from    {c.reference_pose} pose")
    out.append("")
    out.append("hierarchy (channels; * = never animated)")
    for j in s.joints:
        chans = " ".join(_short_channel(ch) for ch in j.channels) or "-"
        mark = "" if j.animated or s.frames < 2 else " *"
        out.append(f"  {'  ' * j.depth}{j.name}  [{chans}]{mark}")
    out.append("")
    out.append("chains")
    if s.layout_problem:
        out.append(f"  no body layout: {s.layout_problem}")
    for ch in s.chains:
        side = "" if ch.side == "centre" else f" {ch.side}"
        out.append(f"  {ch.kind + side:<14} {' > '.join(ch.joints)}")
    if s.frames > 1:
        out.append("")
        still = ", ".join(s.static_joints) if s.static_joints else "none"
        out.append(f"never animated ({len(s.static_joints)}): {still}")
    return "\n".join(out)


def _short_channel(ch: str) -> str:
    return ch[0] + ("p" if ch.endswith("position") else "r")


@main.command("match")
@click.argument("source", type=click.Path(dir_okay=False))
@click.argument("target", type=click.Path(dir_okay=False))
@click.option("-o", "--output", type=click.Path(dir_okay=False), default=None, metavar="MAPPING.yaml",
              help="Write the proposed mapping here (YAML, to review and edit).")
@click.option("--json", "as_json", is_flag=True, help="Print the mapping as JSON instead of a table.")
@_friendly
def match_cmd(source: str, target: str, output: str | None, as_json: bool) -> None:
    """Propose which TARGET joint each SOURCE joint drives, with confidence and reasons."""
    from .io import read_motion
    from .mapping import save_mapping
    from .match import match

    src = read_motion(source)
    tgt = read_motion(target)
    mapping = match(src.skeleton, tgt.skeleton, src, tgt)
    if output:
        save_mapping(mapping, output)
    if as_json:
        click.echo(json.dumps(mapping.model_dump(), indent=2))
        return
    click.echo(_format_mapping_table(mapping, output))


def _format_mapping_table(m, output: str | None) -> str:
    from .mapping import LOW_CONFIDENCE

    low = sum(p.confidence < LOW_CONFIDENCE for p in m.pairs)
    un_s = [u for u in m.unmapped if u.side == "source"]
    un_t = [u for u in m.unmapped if u.side == "target"]
    out = [f"{m.source_file or 'source'}  ->  {m.target_file or 'target'}",
           f"{len(m.pairs)} pairs ({low} below {LOW_CONFIDENCE:g}, marked !); unmapped: {len(un_s)} source, "
           f"{len(un_t)} target joints", ""]
    ws = max([len("source joint")] + [len(p.source) for p in m.pairs])
    wt = max([len("target joint")] + [len(p.target) for p in m.pairs])
    out.append(f"  {'source joint':<{ws}}  {'target joint':<{wt}}  sure  why")
    for p in m.pairs:
        line = f"{'!' if p.confidence < LOW_CONFIDENCE else ' '} {p.source:<{ws}}  {p.target:<{wt}}  " \
               f"{p.confidence:.2f}  {p.reason}"
        out.append(click.style(line, fg="yellow", bold=True) if p.confidence < LOW_CONFIDENCE else line)
    for title, group in (("source", un_s), ("target", un_t)):
        if not group:
            continue
        out.append("")
        out.append(f"unmapped in the {title} ({len(group)})")
        w = max(len(u.joint) for u in group)
        for u in group:
            out.append(f"  {u.joint:<{w}}  {u.reason}")
    if output:
        out.append("")
        out.append(f"mapping written to {output}")
    return "\n".join(out)


@main.command("contacts")
@click.argument("clip", type=click.Path(dir_okay=False))
@click.option("--json", "as_json", is_flag=True, help="Print the contacts as JSON.")
@_reading_options
@click.option("--width", type=click.IntRange(10, 400), default=72, show_default=True,
              help="Columns of the timeline strip.")
@_friendly
def contacts_cmd(clip: str, as_json: bool, fps: float | None, up: str | None, forward: str | None,
                 unit_scale: float | None, width: int) -> None:
    """Find foot contacts on a clip: a timeline per foot, contact spans, support heights, foot skate."""
    from .contacts import detect_contacts, measure_contacts, summarize_contacts

    motion, body, conv = _read_with_convention(clip, fps, up, forward, unit_scale)
    found = detect_contacts(motion, body.legs, conv)
    summary = summarize_contacts(found, measure_contacts(motion, body.legs, found, conv), file=clip)
    if as_json:
        click.echo(json.dumps(summary.model_dump(), indent=2))
        return
    click.echo(_format_contacts(summary, found.flags, width))


def _strip(flags, width: int) -> str:
    """A row of characters for a (F,) bool array: '#' planted throughout a column's frames, '+' for part
    of them, '.' never."""
    import numpy as np

    n = len(flags)
    cols = min(width, max(n, 1))
    edges = np.linspace(0, n, cols + 1).round().astype(int)
    out = []
    for a, b in zip(edges[:-1], edges[1:]):
        share = float(np.mean(flags[a:max(b, a + 1)])) if n else 0.0
        out.append("#" if share >= 0.999 else "+" if share > 0 else ".")
    return "".join(out)


def _format_contacts(s, flags, width: int) -> str:
    import math

    duration = s.frames / s.fps if s.fps else 0.0
    legs = ", ".join(f"{x:.2f}" for x in s.leg_length_m)
    out = [f"{s.file}", "", f"{s.frames} frames at {s.fps:g} fps = {duration:.2f} s, leg length {legs} m"]
    if s.ground_m is not None:
        out.append(f"lowest support {s.ground_m * 100:+.1f} cm (canonical, up is +Y)")
    out.append("")
    label = max([len(f.foot) for f in s.feet] + [4])
    cols = min(width, max(s.frames, 1))
    ruler = [" "] * cols
    step = max(1, math.ceil(duration / 8))
    for t in range(0, int(duration) + 1, step):
        c = int(round(t / duration * (cols - 1))) if duration > 0 else 0
        mark = f"{t}s"
        if c + len(mark) <= cols and all(ch == " " for ch in ruler[c:c + len(mark)]):
            ruler[c:c + len(mark)] = list(mark)
    out.append(" " * (label + 2) + "".join(ruler))
    for i, f in enumerate(s.feet):
        out.append(f"{f.foot:<{label}}  {_strip(flags[:, i], width)}")
    out.append(" " * (label + 2) + "# planted  + partly  . in the air")
    out.append("")
    out.append(f"{'foot':<{label}}  contacts  frames  share  skate mL/frame  skate cm/s  weighted cm/s")
    for f in s.feet:
        ws = "-" if f.weighted_skate_cm_s is None else f"{f.weighted_skate_cm_s:.1f}"
        out.append(f"{f.foot:<{label}}  {f.contacts:>8}  {f.contact_frames:>6}  {f.share * 100:4.0f}%  "
                   f"{f.skate_leg_per_frame * 1000:>14.2f}  {f.skate_cm_s:>10.1f}  {ws:>13}")
    out.append(f"skate: slide of the planted heel or toe (mL = thousandths of a leg length); weighted: "
               f"speed x (2 - 2^(h/H)) below H = {s.skate_height_cm:g} cm, every frame")
    for f in s.feet:
        out.append("")
        out.append(f"{f.foot}:")
        for sp in f.spans:
            out.append(f"  frames {sp.start:>5}-{sp.stop - 1:<5}  {sp.start_s:6.2f}-{sp.stop_s:<6.2f} s  "
                       f"on {sp.support_m * 100:+6.1f} cm")
        if not f.spans:
            out.append("  no contact")
    return "\n".join(out)


@main.command("preview")
@click.argument("clip", type=click.Path(dir_okay=False))
@_rig_options
@click.option("-o", "--output", required=True, type=click.Path(dir_okay=False),
              help="The page to write (one self-contained HTML file).")
@click.option("--plots", "plots_dir", default=None, type=click.Path(file_okay=False),
              help="Also write PNG plots (feet, foot slide, pose fidelity) into this folder.")
@_friendly
def preview_cmd(clip: str, rig: str, mapping: str | None, output: str, plots_dir: str | None) -> None:
    """Retarget CLIP onto RIG and write a page showing both side by side, with the clip's numbers."""
    from pathlib import Path

    from .io import read_motion
    from .pipeline import retarget_clip
    from .preview import contact_flags, mapping_pairs, plot_clip, write_result_preview

    source = read_motion(clip)
    result = retarget_clip(source, rig, mapping=mapping)
    contacts = contact_flags(result.contacts)
    title = f"{Path(clip).name} \u2192 {Path(rig).name}"
    Path(output).parent.mkdir(parents=True, exist_ok=True)
    write_result_preview(output, source, result, title=title)
    click.echo(f"wrote {output}")
    if plots_dir:
        for path in plot_clip(plots_dir, source, result.motion, contacts=contacts,
                              pairs=mapping_pairs(result.mapping), stem=Path(clip).stem, title=title):
            click.echo(f"wrote {path}")
@main.command("batch")
@click.argument("inputs", nargs=-1, required=True)
@_rig_options
@click.option("-o", "--output", "out_dir", required=True, type=click.Path(file_okay=False),
              help="Output folder; mirrors the input folders.")
@click.option("--workers", type=int, default=None, help="Local worker processes (default: one per core).")
@click.option("--cluster", default=None, metavar="ADDRESS",
              help="Run on a dask.distributed scheduler, e.g. tcp://10.0.0.5:8786.")
@click.option("--force", is_flag=True, help="Redo clips whose output is already up to date.")
@click.option("--no-contact-fix", is_flag=True, help="Leave foot contacts as the transfer made them.")
@click.option("--in-place", is_flag=True, help="Remove horizontal root travel.")
@click.option("--format", "fmt", type=click.Choice(["bvh", "glb", "gltf"]), default=None,
              help="Output format (default: the rig's).")
@click.option("--previews", is_flag=True, help="Also write a preview page next to every output clip.")
@click.option("-q", "--quiet", is_flag=True, help="No progress bar; only the summary line.")
@_friendly
def batch_cmd(inputs, rig, mapping, out_dir, workers, cluster, force, no_contact_fix, in_place, fmt, previews,
              quiet):
    """Retarget every clip under INPUTS (folders or glob patterns) onto one rig."""
    from pathlib import Path

    from .batch import REPORT_CSV, plan_batch

    if workers is not None and workers < 1:
        raise OptionError(f"--workers must be at least 1, got {workers}")
    options = {"contact_fix": not no_contact_fix, "in_place": in_place}
    executor, client = None, None
    if cluster:
        try:
            from dask.distributed import Client
        except ImportError:
            raise RetargetError('--cluster needs dask.distributed: pip install "retarget[cluster]"') from None
        try:
            client = Client(cluster, timeout="10s")
        except (OSError, TimeoutError, ValueError) as exc:
            raise RetargetError(f"cannot reach the scheduler at {cluster}: {exc}") from None
        executor = client.get_executor()
    try:
        jobs, prior = plan_batch(inputs, rig, out_dir, mapping=mapping, options=options, force=force,
                                 output_suffix=None if fmt is None else "." + fmt, previews=previews)
        report = _run_with_progress(jobs, prior, out_dir, executor, workers, quiet, rig)
    except KeyboardInterrupt:
        click.echo(f"interrupted: report written to {out_dir}; finished clips are kept", err=True)
        sys.exit(130)
    finally:
        if client is not None:
            client.close()
    cancelled = f", {report.cancelled} cancelled" if report.cancelled else ""
    click.echo(f"{report.done} done, {report.skipped} up to date, {report.failed} failed{cancelled}"
               f" ({report.clips} clips, {report.seconds:.1f} s); report: {Path(out_dir) / REPORT_CSV}")
    for row in report.rows:
        if row.status == "failed":
            click.echo(f"  failed  {row.clip}: {row.error}", err=True)
    if report.failed:
        sys.exit(1)


def _run_with_progress(jobs, prior, out_dir, executor, workers, quiet, rig):
    from .batch import run_batch

    if quiet or not jobs:
        return run_batch(jobs, out_dir, executor=executor, workers=workers, prior_rows=prior, rig=rig)
    from rich.progress import BarColumn, MofNCompleteColumn, Progress, TextColumn, TimeRemainingColumn

    failed = 0
    columns = [TextColumn("retargeting"), BarColumn(), MofNCompleteColumn(),
               TextColumn("{task.fields[failed]} failed"), TextColumn("{task.fields[rate]}"),
               TimeRemainingColumn()]
    with Progress(*columns, transient=True) as bar:
        task = bar.add_task("clips", total=len(jobs), failed=0, rate="")
        start = time.perf_counter()

        def on_row(row):
            nonlocal failed
            failed += row.status == "failed"
            done = bar.tasks[0].completed + 1
            rate = done / max(time.perf_counter() - start, 1e-9)
            bar.update(task, advance=1, failed=failed, rate=f"{rate:.1f} clips/s")

        return run_batch(jobs, out_dir, executor=executor, workers=workers, on_row=on_row, prior_rows=prior,
                         rig=rig)


def _frame_range(text: str | None) -> tuple[int | None, int | None] | None:
    """"START:END" (0-based, END excluded, either may be empty) -> (start, end)."""
    from .errors import OptionError

    if text is None:
        return None
    head, sep, tail = text.partition(":")
    try:
        if not sep:
            raise ValueError
        return (int(head) if head.strip() else None, int(tail) if tail.strip() else None)
    except ValueError:
        raise OptionError(f"--frames expects START:END (whole numbers, either may be left out), got {text!r}") \
            from None


@main.command("apply")
@click.argument("clip", type=click.Path(dir_okay=False))
@_rig_options
@click.option("--no-contact-fix", is_flag=True, help="Leave foot contacts as the transfer makes them.")
@click.option("-o", "--output", required=True, type=click.Path(dir_okay=False), help="Output clip (.bvh, .gltf or .glb).")
@click.option("--in-place", is_flag=True, help="Take the horizontal root travel out.")
@click.option("--root-scale", type=float, default=None, metavar="K",
              help="Rig metres per source metre for root motion (default: leg-length ratio).")
@_axis_option("--source-up", "Override the clip's detected up axis (+X, -Y, ...).")
@_axis_option("--source-forward", "Override the clip's detected forward axis.")
@click.option("--source-unit-scale", type=float, default=None, metavar="M", help="Metres per clip unit.")
@click.option("--source-fps", type=float, default=None, help="Override the clip's frame rate.")
@_axis_option("--rig-up", "Override the rig's detected up axis.")
@_axis_option("--rig-forward", "Override the rig's detected forward axis.")
@click.option("--rig-unit-scale", type=float, default=None, metavar="M", help="Metres per rig unit.")
@click.option("--frames", "frame_range", default=None, metavar="START:END",
              help="Only these source frames (0-based, END excluded).")
@click.option("--fps", type=float, default=None, help="Resample the output to this frame rate.")
@click.option("--report", "report_path", default=None, type=click.Path(dir_okay=False),
              help="Also write the full report as JSON.")
@_friendly
def apply_cmd(clip: str, rig: str, mapping: str | None, no_contact_fix: bool, output: str, in_place: bool,
              root_scale: float | None, source_up: str | None, source_forward: str | None,
              source_unit_scale: float | None, source_fps: float | None, rig_up: str | None,
              rig_forward: str | None, rig_unit_scale: float | None, frame_range: str | None,
              fps: float | None, report_path: str | None) -> None:
    """Put one capture CLIP onto a character RIG and write the result to OUTPUT."""
    from .io import atomic_write, read_motion, write_motion
    from .pipeline import retarget_clip

    frames = _frame_range(frame_range)
    source = read_motion(clip, fps=source_fps)
    result = retarget_clip(source, rig, mapping, in_place=in_place, root_scale=root_scale,
                           source_up=source_up, source_forward=source_forward,
                           source_unit_scale=source_unit_scale, rig_up=rig_up, rig_forward=rig_forward,
                           rig_unit_scale=rig_unit_scale, frames=frames, fps=fps,
                           contact_fix=not no_contact_fix)
    from pathlib import Path

    template = rig if Path(rig).suffix.lower() in (".gltf", ".glb") else None  # keeps the rig's mesh and skin
    Path(output).parent.mkdir(parents=True, exist_ok=True)
    write_motion(output, result.motion, template=template)
    if report_path:
        Path(report_path).parent.mkdir(parents=True, exist_ok=True)
        atomic_write(report_path, (json.dumps(result.report.model_dump(), indent=2) + "\n").encode())
    click.echo(_format_apply(result.report, output))


def _format_apply(r, output: str) -> str:
    out = [f"wrote {output}: {r.frames} frames at {r.fps:g} fps, {r.target.joints} joints "
           f"({r.pairs} mapped from {r.source.joints})"]
    worst = max(r.joints, key=lambda j: j.aim_correction_max_deg, default=None)
    if r.direction_error_mean_deg is not None:
        out.append(f"pose fidelity: bone spans {r.direction_error_mean_deg:.2f} deg from the source on "
                   f"average, {r.direction_error_max_deg:.2f} deg at worst")
    if worst is not None:
        out.append(f"aim correction: up to {worst.aim_correction_max_deg:.1f} deg ({worst.target})")
    bent = max((j for j in r.joints if j.between_bend_max_deg is not None),
               key=lambda j: j.between_bend_max_deg, default=None)
    if bent is not None:
        out.append(f"unmapped joints bent to aim: up to {bent.between_bend_max_deg:.1f} deg "
                   f"(between {bent.target} and {bent.span_end})")
    out.append(f"root motion: scale {r.root_scale:.3f}, ground offset {100 * r.ground_offset_m:+.1f} cm"
               + (", in place" if r.in_place else ""))
    out.append(f"foot contacts: {r.contact_fix}")
    if r.contacts is not None:
        for f in r.contacts.feet:
            line = (f"  {f.foot:<6} {f.contacts} contacts, {f.contact_frames} frames; slide "
                    f"{f.skate_before_cm_s:.2f} cm/s")
            if f.skate_after_cm_s is not None:
                line += f" -> {f.skate_after_cm_s:.2f} cm/s"
            line += f", sinks {f.penetration_before_cm:.2f} cm"
            if f.penetration_after_cm is not None:
                line += f" -> {f.penetration_after_cm:.2f} cm"
            out.append(line)
    out.extend(f"warning: {w}" for w in r.warnings)
    return "\n".join(out)


if __name__ == "__main__":  # pragma: no cover
    main()
