"""Command line: thin click commands over the public API.

Every RetargetError becomes one line on stderr and exit status 2; no traceback.
"""

from __future__ import annotations

import functools
import json
import sys

import click

from .errors import RetargetError


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


@main.command("inspect")
@click.argument("file", type=click.Path(dir_okay=False))
@click.option("--json", "as_json", is_flag=True, help="Print the summary as JSON.")
@click.option("--fps", type=float, default=None, help="Override the file's frame rate.")
@_axis_option("--up", "Override the detected up axis (+X, -Y, ...).")
@_axis_option("--forward", "Override the detected forward axis.")
@click.option("--unit-scale", type=float, default=None, metavar="M", help="Override metres per file unit.")
@_friendly
def inspect_cmd(file: str, as_json: bool, fps: float | None, up: str | None, forward: str | None,
                unit_scale: float | None) -> None:
    """Summarise a clip or rig: joint tree, chains, convention, rest pose, frames, static joints."""
    from .convention import detect_convention
    from .describe import summarize
    from .io import read_motion

    from .convention import parse_axis
    from .errors import SkeletonError

    up, forward = (parse_axis(a) if a else None for a in (up, forward))
    motion = read_motion(file, fps=fps)
    try:
        conv = detect_convention(motion.skeleton, motion).with_overrides(up, forward, unit_scale)
    except SkeletonError:
        conv = None  # summarize reports why there is no body layout
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


if __name__ == "__main__":  # pragma: no cover
    main()
