"""The ``stimplan`` command.

Commands: ``demo``, ``check``, ``export``, ``report``, ``preview``.

Exit codes: 0 success, 1 invalid input, 2 exposure refusal, 3 internal error.
Errors print one line, without a traceback unless ``--debug`` is given.
"""

from __future__ import annotations

import argparse
import json
import sys
from collections.abc import Sequence

from . import __version__
from .errors import ExposureLimitError, StimplanError

__all__ = ["main", "build_parser", "plan_summary", "print_table"]

EXIT_OK, EXIT_INPUT, EXIT_EXPOSURE, EXIT_INTERNAL = 0, 1, 2, 3


# -- shared ---------------------------------------------------------------------------


def _load_and_plan(path: str, *, quiet: bool = False):
    from .planner import plan_sequence
    from .sequence import load_sequence

    spec = load_sequence(path)
    return plan_sequence(spec, progress=not quiet)


def stimulus_rows(plan) -> list[dict]:
    """One summary dict per distinct stimulus (the `check --json` entries)."""
    rows = []
    for sp in plan.holograms:
        frames = [f for f in plan.frames if f.hologram_index == sp.hologram_index and f.lit]
        names = sorted({f.stimulus for f in frames}) or [sp.name]
        power = frames[0].power_mw if frames else 0.0
        h, m = sp.hologram_figures, sp.mask_figures
        exp = plan.stimulus_exposure.get(sp.hologram_index)
        first = frames[0] if frames else None
        rows.append(
            {
                "name": names[0],
                "names": names,
                "hologram_index": sp.hologram_index,
                "laser_power_mw": power,
                "mask_laser_power_mw": None if first is None else plan.mask_power_for(first),
                "efficiency": sp.metrics.efficiency,
                "uniformity": sp.metrics.uniformity,
                "on_pixel_power_uw": {
                    "hologram": None if h is None else h.on_power_uw * power,
                    "mask": None if m is None else m.on_power_uw * power,
                },
                "on_pixel_cv": None if h is None else h.on_cv,
                "exposure_ratio": None if exp is None else exp.worst_ratio,
                "verdict": None if exp is None else exp.verdict,
            }
        )
    return rows


def plan_summary(plan) -> dict:
    """Everything `check --json` prints."""
    from .cautions import CAUTIONS

    e = plan.exposure
    out = {
        "title": plan.spec.title,
        "stimplan_version": __version__,
        "seed": plan.seed,
        "n_frames": len(plan.frames),
        "duration_ms": plan.duration_ms,
        "stimuli": stimulus_rows(plan),
        "exposure": {
            "verdict": plan.verdict,
            "worst_ratio": 0.0 if e is None else e.worst_ratio,
            "found_ratio": None if e is None else e.found_ratio,
            "protocol_ratio": None if e is None else e.protocol_ratio,
            "binding_limit": None if e is None else e.binding_limit,
            "binding": None if e is None else e.binding_text(),
            "binding_rule": None if e is None else e.binding_rule,
            "margin": None if e is None else e.margin,
            "edition": None if e is None else e.edition,
            "protocol": None
            if e is None or e.protocol is None
            else {"worst_ratio": e.protocol.worst_ratio, "verdict": e.protocol.verdict},
            "mask_worst_ratio": None
            if plan.mask_exposure is None
            else plan.mask_exposure.worst_ratio,
            "mask_equal_irradiance_worst_ratio": None
            if plan.mask_exposure_equal_irradiance is None
            else plan.mask_exposure_equal_irradiance.worst_ratio,
            "max_peak_frame_power_mw": {
                "hologram": plan.max_laser_power_mw("hologram"),
                "mask": plan.max_laser_power_mw("mask"),
            },
        },
        "cautions": CAUTIONS,
    }
    from .export import json_safe

    return json_safe(out)


def _num(x):
    return float(x) if isinstance(x, str) else x


def _fmt(x, spec=".3g") -> str:
    return "-" if x is None else format(x, spec)


def print_table(plan, file=None) -> None:
    """The summary table of a plan, with the cautions."""
    from .cautions import CAUTIONS

    file = sys.stdout if file is None else file

    s = plan_summary(plan)
    print(f"{s['title']}  ({s['n_frames']} frames, {s['duration_ms'] / 1e3:.1f} s)", file=file)
    head = (
        f"{'stimulus':<22}{'laser mW':>9}{'effic.':>8}{'ON µW holo':>12}{'ON µW mask':>12}"
        f"{'ON CV':>8}{'exposure':>10}  verdict"
    )
    print(head, file=file)
    print("-" * len(head), file=file)
    for r in s["stimuli"]:
        print(
            f"{r['name'][:21]:<22}{r['laser_power_mw']:>9.3g}{r['efficiency']:>8.3f}"
            f"{_fmt(r['on_pixel_power_uw']['hologram']):>12}"
            f"{_fmt(r['on_pixel_power_uw']['mask']):>12}{_fmt(r['on_pixel_cv'], '.3f'):>8}"
            f"{_fmt(r['exposure_ratio']):>10}  {r['verdict'] or '-'}",
            file=file,
        )
    e = s["exposure"]
    mp = e["max_peak_frame_power_mw"]
    print(
        "power planning: the mask needs "
        + ", ".join(
            f"{r['name']} {_fmt(r['mask_laser_power_mw'])} mW"
            for r in s["stimuli"]
            if r["mask_laser_power_mw"] is not None
        )
        + f" for the same ON-pixel irradiance; largest peak frame power within every limit: "
        f"hologram {_fmt(_num(mp['hologram']))} mW, mask {_fmt(_num(mp['mask']))} mW",
        file=file,
    )
    line = (
        f"sequence exposure: standard {_fmt(e['worst_ratio'])} of the limit at most "
        f"({e['binding_rule'] or '-'})"
    )
    if e["protocol"]:
        line += f"; protocol cap {e['protocol']['worst_ratio']:.3g} ({e['protocol']['verdict']})"
    line += f"; verdict: {e['verdict']}"
    print(line, file=file)
    if e["binding"]:
        print(f"what binds: {e['binding']}", file=file)
    if e["mask_equal_irradiance_worst_ratio"] is not None:
        print(
            f"the mask, for the same ON-pixel irradiance: "
            f"{e['mask_equal_irradiance_worst_ratio']:.3g} of the limit",
            file=file,
        )
    if e["edition"]:
        print(f"limits: {e['edition']}", file=file)
    print("CAUTION: " + CAUTIONS, file=file)


# -- commands -------------------------------------------------------------------------


def _cmd_demo(args: argparse.Namespace) -> int:
    from .demo import run_demo

    return run_demo(args.output, force=args.force, quick=args.quick)


def _cmd_check(args: argparse.Namespace) -> int:
    plan = _load_and_plan(args.file, quiet=args.json)
    if args.json:
        print(json.dumps(plan_summary(plan), indent=1))
    else:
        print_table(plan)
    return EXIT_OK


def _cmd_export(args: argparse.Namespace) -> int:
    from .export import check_export_target, export_plan

    # refuse a target that may not be written before any computing
    check_export_target(args.output, force=args.force, keep=(args.file,))
    plan = _load_and_plan(args.file)
    out = export_plan(
        plan,
        args.output,
        force=args.force,
        stack_format=args.stack,
        acknowledge_reason=args.acknowledge,
    )
    print_table(plan)
    print(f"export written to {out}", file=sys.stderr)
    return EXIT_OK


def _cmd_report(args: argparse.Namespace) -> int:
    from .report import write_report

    plan = _load_and_plan(args.file)
    out = write_report(plan, args.output, force=args.force)
    print_table(plan)
    print(f"report written to {out}", file=sys.stderr)
    return EXIT_OK


def _cmd_preview(args: argparse.Namespace) -> int:
    try:
        from stimplan_napari.preview import preview
    except ImportError as exc:
        raise StimplanError(
            "preview", None, "the napari extra (pip install 'stimplan[napari]')", str(exc)
        ) from None
    return preview(args.file, close_after_load=args.close_after_load)


def build_parser() -> argparse.ArgumentParser:
    p = argparse.ArgumentParser(
        prog="stimplan",
        description="Plan phase-hologram light stimuli for photovoltaic retinal implants. "
        "Exposure figures are estimates, not a safety approval.",
    )
    p.add_argument("--version", action="version", version=f"stimplan {__version__}")
    p.add_argument("--debug", action="store_true", help="show tracebacks on errors")
    sub = p.add_subparsers(dest="command", metavar="COMMAND")
    sub.required = True

    d = sub.add_parser("demo", help="plan, export and report the built-in demo scenario")
    d.add_argument("-o", "--output", required=True, help="folder to create")
    d.add_argument("--force", action="store_true", help="replace an existing folder")
    d.add_argument("--quick", action="store_true", help="a smaller SLM, for a fast look")
    d.set_defaults(func=_cmd_demo)

    c = sub.add_parser("check", help="validate a sequence file and assess it")
    c.add_argument("file", help="sequence file (.toml)")
    c.add_argument("--json", action="store_true", help="print one JSON object")
    c.set_defaults(func=_cmd_check)

    e = sub.add_parser("export", help="export the hologram stack, timeline and manifest")
    e.add_argument("file", help="sequence file (.toml)")
    e.add_argument("-o", "--output", required=True, help="export folder to create")
    e.add_argument("--force", action="store_true", help="replace an existing folder")
    e.add_argument("--stack", choices=("tiff", "png"), default="tiff", help="stack format")
    e.add_argument(
        "--acknowledge",
        metavar="REASON",
        help="export although the estimate is above a limit; the reason is recorded",
    )
    e.set_defaults(func=_cmd_export)

    r = sub.add_parser("report", help="write the HTML report of a sequence")
    r.add_argument("file", help="sequence file (.toml)")
    r.add_argument("-o", "--output", required=True, help="report file (.html)")
    r.add_argument("--force", action="store_true", help="replace an existing file")
    r.set_defaults(func=_cmd_report)

    v = sub.add_parser("preview", help="open napari with the plan of a sequence")
    v.add_argument("file", help="sequence file (.toml)")
    v.add_argument(
        "--close-after-load", action="store_true", help="close the viewer once loaded (tests)"
    )
    v.set_defaults(func=_cmd_preview)
    return p


def main(argv: Sequence[str] | None = None) -> int:
    parser = build_parser()
    args = parser.parse_args(argv)
    try:
        return int(args.func(args) or 0)
    except ExposureLimitError as exc:
        if args.debug:
            raise
        print(f"stimplan: refused: {exc}", file=sys.stderr)
        return EXIT_EXPOSURE
    except StimplanError as exc:
        if args.debug:
            raise
        print(f"stimplan: error: {_one_line(exc)}", file=sys.stderr)
        return EXIT_INPUT
    except KeyboardInterrupt:
        print("stimplan: interrupted", file=sys.stderr)
        return EXIT_INTERNAL
    except Exception as exc:
        if args.debug:
            raise
        print(f"stimplan: internal error: {type(exc).__name__}: {exc}", file=sys.stderr)
        return EXIT_INTERNAL


def _one_line(exc: Exception) -> str:
    text = str(exc)
    lines = [ln.strip() for ln in text.splitlines() if ln.strip()]
    if len(lines) <= 1:
        return text
    return "; ".join(lines)


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
