"""The built-in demo: the rat grating-acuity scenario, planned, exported and reported.

The scenario is :data:`stimplan.scenarios.DEMO_SCENARIO`; its numbers are a
demo of our own, not a measured protocol.
"""

from __future__ import annotations

import sys
from pathlib import Path

from .atomic import atomic_folder
from .plan import plan_sequence
from .present.export import export_plan
from .present.report import write_report
from .present.summary import print_table
from .scenarios import DEMO_SCENARIO, load_scenario

__all__ = ["run_demo"]


def run_demo(output: str | Path, *, force: bool = False, quick: bool = False) -> int:
    """Plan the demo scenario, write ``export/`` and ``report.html`` into ``output``.

    Prints the summary table (with the cautions). The output folder is
    written atomically and never replaced without ``force``.
    """
    spec = load_scenario(DEMO_SCENARIO, quick=quick)
    with plan_sequence(spec, progress=True) as plan:
        with atomic_folder(output, force=force) as tmp:
            export_plan(plan, tmp / "export")
            write_report(plan, tmp / "report.html")
        print_table(plan)
    print(f"demo written to {Path(output)} (export/ and report.html)", file=sys.stderr)
    return 0
