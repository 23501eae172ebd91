"""The ``stimplan`` command.

Commands: ``demo``, ``check``, ``export``, ``report``, ``preview``.

Exit codes: 0 success, 1 invalid input, 2 exposure refusal, 3 internal error.
Errors print one line each, ``stimplan: error: ...``, without a traceback unless
``--debug`` is given.
"""

from __future__ import annotations

import argparse
import json
import sys
from collections.abc import Sequence
from pathlib import Path

from . import __version__
from .errors import ExportError, ExposureLimitError, StimplanError
from .present.summary import plan_summary, print_table

__all__ = ["main", "build_parser", "plan_summary", "print_table"]  # the last two re-exported

EXIT_OK, EXIT_INPUT, EXIT_EXPOSURE, EXIT_INTERNAL, EXIT_INTERRUPTED = 0, 1, 2, 3, 130

EXIT_CODES = """exit codes:
  0    success
  1    invalid input, usage or environment error (unreadable or unwritable path,
       full disk, too little memory for the plan, no display for preview)
  2    refused: the exposure estimate is above a limit (export without --acknowledge)
  3    internal error (a bug: please report it with --debug output)
  130  interrupted (Ctrl-C); an interrupted export leaves no complete-looking folder"""


class _Parser(argparse.ArgumentParser):
    """Usage errors exit with the invalid-input code, not argparse's 2 (the refusal code)."""

    def error(self, message: str):  # type: ignore[override]
        self.print_usage(sys.stderr)
        self.exit(EXIT_INPUT, f"{self.prog}: error: {message}\n")


# -- shared ---------------------------------------------------------------------------


def _load_and_plan(args: argparse.Namespace, *, quiet: bool = False):
    """Load the sequence, refuse it if its memory estimate is too high, and plan it."""
    from .plan import plan_sequence
    from .plan.memory import check_memory
    from .sequence import load_sequence

    spec = load_sequence(args.file)
    gb = args.max_memory_gb
    check_memory(spec, limit_bytes=None if gb is None else gb * 2**30)
    return plan_sequence(spec, progress=not (quiet or args.quiet), scheduler=args.scheduler)


def _scheduler(text: str) -> str:
    """``--scheduler``: a local scheduler's name or a dask scheduler's address."""
    if text in ("serial", "threads") or text.startswith(("tcp://", "tls://", "inproc://")):
        return text
    raise argparse.ArgumentTypeError(
        f"'serial', 'threads' or a dask scheduler address (tcp://host:port), not {text!r}"
    )


def _print_timings(plan, extra: dict | None = None) -> None:
    """``--verbose``: where the time went, stage by stage, on stderr."""
    timings = {**plan.timings_s, **(extra or {})}
    parts = [f"{stage} {seconds:.2f} s" for stage, seconds in timings.items()]
    print("timings: " + ", ".join(parts), file=sys.stderr)


def _memory_gb(text: str) -> float:
    """``--max-memory-gb``: a positive, finite number of GiB."""
    try:
        gb = float(text)
    except ValueError:
        gb = float("nan")
    if not (0 < gb < float("inf")):
        raise argparse.ArgumentTypeError(f"a positive number of GiB, not {text!r}")
    return gb


def _planning_options(p: argparse.ArgumentParser) -> None:
    p.add_argument(
        "--quiet", action="store_true", help="no progress bars (they go to stderr, TTY only)"
    )
    p.add_argument(
        "--max-memory-gb",
        type=_memory_gb,
        metavar="GIB",
        help="refuse a plan whose memory estimate is above this "
        "(default: 80%% of the available memory)",
    )
    p.add_argument(
        "--scheduler",
        type=_scheduler,
        metavar="ADDRESS",
        default=None,
        help="where the distinct holograms are computed: 'threads' (the default, this "
        "machine's cores), 'serial', or a dask.distributed scheduler address "
        "(tcp://host:port) whose workers have stimplan installed",
    )
    p.add_argument(
        "--verbose",
        action="store_true",
        help="print the time of each stage (holograms, predictions, readouts, exposure, "
        "export) on stderr",
    )


# -- commands -------------------------------------------------------------------------


def _cmd_demo(args: argparse.Namespace) -> int:
    from .demo import run_demo

    return run_demo(args.output, force=args.force, quick=args.quick)


def _cmd_check(args: argparse.Namespace) -> int:
    with _load_and_plan(args, quiet=args.json) as plan:
        if args.json:
            print(json.dumps(plan_summary(plan), indent=1))
        else:
            print_table(plan)
        if args.verbose:
            _print_timings(plan)
    return EXIT_OK


def _cmd_export(args: argparse.Namespace) -> int:
    from .present.export import check_export_target, export_plan, load_export

    # refuse a target that may not be written before any computing
    check_export_target(args.output, force=args.force, keep=(args.file,))
    with _load_and_plan(args) as plan:
        out = export_plan(
            plan,
            args.output,
            force=args.force,
            stack_format=args.stack,
            acknowledge_reason=args.acknowledge,
        )
        print_table(plan)
        if args.verbose:
            _print_timings(plan, load_export(out, verify=False).manifest["timings_s"])
    print(f"export written to {out}", file=sys.stderr)
    return EXIT_OK


def _check_report_target(output: str, *, force: bool) -> None:
    """Refuse, before any computing, a report path that cannot be written."""
    from .present.export import check_writable_location

    dst = Path(output).absolute()
    allowed = "a new file, or with --force an existing file"
    if dst.is_dir():
        raise ExportError("output", str(dst), allowed, "it is a folder")
    if dst.exists() and not force:
        raise ExportError("output", str(dst), allowed, "it exists; pass --force to replace it")
    check_writable_location(dst)


def _cmd_report(args: argparse.Namespace) -> int:
    from .present.report import write_report

    _check_report_target(args.output, force=args.force)
    with _load_and_plan(args) as plan:
        out = write_report(plan, args.output, force=args.force)
        print_table(plan)
        if args.verbose:
            _print_timings(plan)
    print(f"report written to {out}", file=sys.stderr)
    return EXIT_OK


def _check_display() -> None:
    """Refuse ``preview`` without a display: Qt would abort the process (SIGABRT)."""
    import os

    if not sys.platform.startswith("linux") or os.environ.get("QT_QPA_PLATFORM"):
        return
    if not (os.environ.get("DISPLAY") or os.environ.get("WAYLAND_DISPLAY")):
        raise StimplanError(
            "preview",
            None,
            "a display (DISPLAY or WAYLAND_DISPLAY set)",
            "none is set; run it in a desktop session, or under a virtual one: "
            "xvfb-run -a stimplan preview FILE",
        )


def _cmd_preview(args: argparse.Namespace) -> int:
    _check_display()
    try:
        from stimplan_napari.preview import preview
    except ImportError as exc:
        raise StimplanError(
            "preview", None, "the napari extra (pip install 'stimplan[napari]')", str(exc)
        ) from None
    return preview(args.file, close_after_load=args.close_after_load)


def build_parser() -> argparse.ArgumentParser:
    p = _Parser(
        prog="stimplan",
        epilog=EXIT_CODES,
        formatter_class=argparse.RawDescriptionHelpFormatter,
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
    _planning_options(c)
    c.set_defaults(func=_cmd_check)

    e = sub.add_parser(
        "export", help="export the hologram stack, timeline, pulse events and manifest"
    )
    e.add_argument("file", help="sequence file (.toml)")
    e.add_argument("-o", "--output", required=True, help="export folder to create")
    e.add_argument("--force", action="store_true", help="replace an existing folder")
    e.add_argument("--stack", choices=("tiff", "png"), default="tiff", help="stack format")
    e.add_argument(
        "--acknowledge",
        metavar="REASON",
        help="export although the estimate is above a limit; the reason is recorded",
    )
    _planning_options(e)
    e.set_defaults(func=_cmd_export)

    r = sub.add_parser("report", help="write the HTML report of a sequence")
    r.add_argument("file", help="sequence file (.toml)")
    r.add_argument("-o", "--output", required=True, help="report file (.html)")
    r.add_argument("--force", action="store_true", help="replace an existing file")
    _planning_options(r)
    r.set_defaults(func=_cmd_report)

    v = sub.add_parser("preview", help="open napari with the plan of a sequence")
    v.add_argument("file", help="sequence file (.toml)")
    v.add_argument(
        "--close-after-load", action="store_true", help="close the viewer once loaded (tests)"
    )
    v.set_defaults(func=_cmd_preview)
    return p


def _error_json(exc: BaseException, code: int) -> str:
    """The JSON that ``--json`` prints for an error: the first error and every one."""
    items = getattr(exc, "errors", None) or [exc]

    def one(e: BaseException) -> dict:
        return {
            "key": getattr(e, "field", None),
            "line": getattr(e, "line", None),
            "message": str(e),
        }

    return json.dumps(
        {"error": one(items[0]), "errors": [one(e) for e in items], "exit_code": code}, indent=1
    )


def main(argv: Sequence[str] | None = None) -> int:
    parser = build_parser()
    args = parser.parse_args(argv)
    as_json = bool(getattr(args, "json", False))

    def fail(exc: BaseException, code: int, text: str) -> int:
        if as_json:
            print(_error_json(exc, code))
        print(text, file=sys.stderr)
        return code

    try:
        return int(args.func(args) or 0)
    except ExposureLimitError as exc:
        if args.debug:
            raise
        return fail(exc, EXIT_EXPOSURE, f"stimplan: refused: {exc}")
    except StimplanError as exc:
        if args.debug:
            raise
        return fail(exc, EXIT_INPUT, _error_lines(exc))
    except KeyboardInterrupt as exc:
        return fail(exc, EXIT_INTERRUPTED, "stimplan: interrupted")
    except MemoryError as exc:  # the estimate let it through, the machine did not
        if args.debug:
            raise
        return fail(
            exc,
            EXIT_INPUT,
            "stimplan: error: out of memory; lower hologram.oversample or the SLM pixels, "
            "or pass a lower --max-memory-gb to be refused before computing",
        )
    except OSError as exc:  # the environment: unwritable, missing, full disk
        if args.debug:
            raise
        return fail(exc, EXIT_INPUT, f"stimplan: error: {exc}")
    except Exception as exc:
        if args.debug:
            raise
        return fail(exc, EXIT_INTERNAL, f"stimplan: internal error: {type(exc).__name__}: {exc}")


def _error_lines(exc: Exception) -> str:
    """One line per error, each starting ``stimplan: error:``; a heading says where."""
    lines = [ln.strip() for ln in str(exc).splitlines() if ln.strip()] or [type(exc).__name__]
    if len(lines) == 2:  # where, and its one error
        lines = [f"{lines[0]}: {lines[1]}"]
    return "\n".join(f"stimplan: error: {ln}" for ln in lines)


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
