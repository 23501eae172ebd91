"""Reuse across a sequence: a drifting grating planned with and without reuse.

Prints one line: ``reuse_speedup=<plan wall time without reuse / with reuse>``, both
measured in this run; ``hologram_stage_speedup`` for the hologram stage alone (what
reuse changes); the share of the reused plan's time spent on the exposure assessment;
and how many holograms each plan computed.
"""

from __future__ import annotations

import argparse
import sys
import time
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))  # the shared scenarios in tests/
from stimplan.plan import plan_sequence
from stimplan.sequence import parse_sequence
from tests.scenarios import drifting_grating


def main(argv=None) -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--slm-pixels", type=int, default=1024)
    ap.add_argument("--frames", type=int, default=20)
    args = ap.parse_args(argv)
    spec = parse_sequence(drifting_grating(args.slm_pixels, args.frames))
    plan_sequence(parse_sequence(drifting_grating(128, 2)), progress=False)  # warm the kernels
    t0 = time.perf_counter()
    plain = plan_sequence(spec, progress=False, reuse=False)
    t_plain = time.perf_counter() - t0
    t0 = time.perf_counter()
    reused = plan_sequence(spec, progress=False, reuse=True)
    t_reuse = time.perf_counter() - t0
    n_fresh = sum(1 for sp in reused.holograms if sp.hologram.reused_from is None)
    h_plain = plain.timings_s["hologram_batch_wall"]
    h_reuse = reused.timings_s["hologram_batch_wall"]
    print(
        f"reuse_speedup={t_plain / t_reuse:.2f} hologram_stage_speedup={h_plain / h_reuse:.2f} "
        f"exposure_share={reused.timings_s['exposure'] / t_reuse:.2f} "
        f"plain_s={t_plain:.1f} reuse_s={t_reuse:.1f} frames={args.frames} "
        f"computed_without_reuse={len(plain.holograms)} computed_with_reuse={n_fresh}",
        flush=True,
    )


if __name__ == "__main__":
    main()
