"""Peak memory of planning and exporting a long sequence (500 frames, 1024² SLM).

The sequence is a drifting grating (demo numbers): 50 phases shown in turn, ten
times over. Its holograms are spooled to disk by the planner and streamed into
the export one page at a time. Prints::

    peak_rss_mb=<peak resident memory of this process> frames=500 holograms=50
"""

from __future__ import annotations

import argparse
import resource
import sys
import tempfile
import time
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))  # the shared scenarios in tests/
from stimplan.plan import plan_sequence
from stimplan.present.export import export_plan
from stimplan.sequence import parse_sequence
from tests.scenarios import drifting_steps, header


def sequence_text(n: int, phases: int, cycles: int) -> str:
    parts = [header(n, title=f"drifting grating, {phases * cycles} frames", iterations=30)]
    parts.append(f"\n[order]\nrepeats = {cycles}\n")
    parts.append(drifting_steps(phases, duration_ms=50, pulse_ms=5))
    return "".join(parts)


def main(argv=None) -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--slm-pixels", type=int, default=1024)
    ap.add_argument("--phases", type=int, default=50)
    ap.add_argument("--cycles", type=int, default=10)
    args = ap.parse_args(argv)
    spec = parse_sequence(sequence_text(args.slm_pixels, args.phases, args.cycles))
    t0 = time.perf_counter()
    plan = plan_sequence(spec, progress=False)
    with tempfile.TemporaryDirectory() as d:
        export_plan(plan, Path(d) / "export")
    dt = time.perf_counter() - t0
    peak_mb = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024.0
    print(
        f"peak_rss_mb={peak_mb:.0f} frames={len(plan.frames)} holograms={len(plan.holograms)} "
        f"spooled={plan.holograms[0].spooled} seconds={dt:.0f}",
        flush=True,
    )


if __name__ == "__main__":
    main()
