"""The ``stimplan`` command.

Exit codes: 0 success, 1 invalid input, 2 exposure refusal, 3 internal error.
Errors print one line, without a traceback unless ``--debug`` is given.
"""

from __future__ import annotations

import argparse
import sys
from collections.abc import Sequence

from . import __version__
from .errors import ExposureLimitError, StimplanError

EXIT_OK, EXIT_INPUT, EXIT_EXPOSURE, EXIT_INTERNAL = 0, 1, 2, 3


def _cmd_demo(args: argparse.Namespace) -> int:
    from .demo import run_demo

    return run_demo(args.output, force=args.force, quick=args.quick)


def build_parser() -> argparse.ArgumentParser:
    p = argparse.ArgumentParser(
        prog="stimplan",
        description="Plan phase-hologram light stimuli for photovoltaic retinal implants.",
    )
    p.add_argument("--version", action="version", version=f"stimplan {__version__}")
    p.add_argument("--debug", action="store_true", help="show tracebacks on errors")
    sub = p.add_subparsers(dest="command", metavar="COMMAND")
    sub.required = True

    d = sub.add_parser("demo", help="plan the built-in demo scenario and print its figures")
    d.add_argument("-o", "--output", required=True, help="folder to write the results into")
    d.add_argument("--force", action="store_true", help="replace an existing output folder")
    d.add_argument("--quick", action="store_true", help="a smaller SLM, for a fast look")
    d.set_defaults(func=_cmd_demo)
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
        print(f"stimplan: error: {exc}", file=sys.stderr)
        return EXIT_INPUT
    except KeyboardInterrupt:
        print("stimplan: interrupted", file=sys.stderr)
        return EXIT_INTERNAL
    except Exception as exc:
        if args.debug:
            raise
        print(f"stimplan: internal error: {type(exc).__name__}: {exc}", file=sys.stderr)
        return EXIT_INTERNAL


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
