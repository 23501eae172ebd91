"""Measured peak memory of planning against the estimate that guards it.

Each case plans one small grating sequence in a child process pinned to
``lanes`` cores and reads the child's peak resident set (``ru_maxrss``). The
memory of the interpreter and the imports, measured in a child that only
imports and loads the sequence, is subtracted. The script prints, per case,
the measured working set, the estimate of
:func:`stimplan.plan.memory.estimate_peak_bytes` and their ratio, which
must stay above 1 (the estimate is an upper bound).

Run: ``python benchmarks/memory_model.py [--quick]``.
"""

from __future__ import annotations

import argparse
import json
import os
import subprocess
import sys
import tempfile
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT))

from tests.scenarios import header  # noqa: E402

CHILD = r"""
import json, resource, sys
from stimplan.sequence import load_sequence
from stimplan.plan import plan_sequence
from stimplan.plan.memory import estimate_peak_bytes
spec = load_sequence(sys.argv[1])
est = estimate_peak_bytes(spec)
if sys.argv[2] == "plan":
    plan = plan_sequence(spec, progress=False, store="memory")
    plan.exposure
print(json.dumps({"rss_kb": resource.getrusage(resource.RUSAGE_SELF).ru_maxrss,
                  "estimate": est.total_bytes}))
"""


def _sequence(n: int, oversample: int, stimuli: int) -> str:
    text = header(n, title=f"memory model {n} x{oversample}", iterations=10)
    text += f"oversample = {oversample}\n"
    for k in range(stimuli):
        text += f"""
[stimuli.bars{k}]
kind = "grating"
bar_width_px = {2 + k}
"""
    for k in range(stimuli):
        text += f"""
[[steps]]
stimulus = "bars{k}"
duration_ms = 200
pulse_ms = 10
rate_hz = 20
power_mw = 1.0
"""
    return text


def _run(path: Path, mode: str, lanes: int) -> dict:
    cores = sorted(os.sched_getaffinity(0))[:lanes]
    out = subprocess.run(
        [sys.executable, "-c", CHILD, str(path), mode],
        check=True,
        capture_output=True,
        text=True,
        cwd=ROOT,
        preexec_fn=lambda: os.sched_setaffinity(0, cores),
    )
    return json.loads(out.stdout.strip().splitlines()[-1])


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--quick", action="store_true", help="two small cases only")
    args = ap.parse_args()
    # (SLM side, oversample, lanes, stimuli)
    cases = (
        [(256, 2, 1, 1), (256, 4, 2, 2)]
        if args.quick
        else [
            (256, 2, 1, 1),
            (512, 2, 1, 1),
            (512, 4, 1, 1),
            (768, 2, 1, 1),
            (512, 4, 1, 2),
            (512, 4, 2, 2),
            (1024, 2, 2, 2),
        ]
    )
    worst = float("inf")
    with tempfile.TemporaryDirectory() as tmp:
        for n, s, lanes, k in cases:
            path = Path(tmp) / f"m{n}_{s}_{k}.toml"
            path.write_text(_sequence(n, s, k))
            base = _run(path, "load", lanes)["rss_kb"] * 1024
            got = _run(path, "plan", lanes)
            used = got["rss_kb"] * 1024 - base
            ratio = got["estimate"] / max(used, 1)
            worst = min(worst, ratio)
            print(
                f"slm={n}^2 oversample={s} lanes={lanes} stimuli={k} "
                f"measured_mb={used / 2**20:.0f} "
                f"estimate_mb={got['estimate'] / 2**20:.0f} estimate/measured={ratio:.2f}"
            )
    print(f"worst estimate/measured={worst:.2f}")


if __name__ == "__main__":
    main()
