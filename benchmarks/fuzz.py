"""Fuzzing the sequence reader: many broken sequence files, none may crash it.

Draws ``--cases`` cases (default 10 000) from the strategies of
``tests/fuzz_cases.py`` with Hypothesis, seeded by ``--seed`` (the same seed
gives the same cases), reads each one and counts the crashes: any exception
but a ``StimplanError`` with a key path, or one that only wraps an
unexpected exception. The first few crashes are printed with their input and
traceback. Ends with one line ``fuzz_cases=<n> crashes=<m>``.
"""

from __future__ import annotations

import argparse
import sys
import tempfile
from pathlib import Path

from hypothesis import HealthCheck, Phase, given, seed, settings
from tqdm import tqdm

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))  # the shared cases in tests/
from tests.fuzz_cases import case_problem, fuzz_cases


def run_fuzz(*, cases: int, seed_value: int, shown: int) -> tuple[int, list[tuple[str, str]]]:
    """Run ``cases`` cases; returns how many ran and the (case, problem) crashes."""
    crashes: list[tuple[str, str]] = []
    count = 0
    with tempfile.TemporaryDirectory() as tmp, tqdm(total=cases, file=sys.stderr) as bar:
        folder = Path(tmp)

        @seed(seed_value)
        @settings(
            max_examples=cases,
            deadline=None,
            database=None,
            phases=[Phase.generate],
            suppress_health_check=list(HealthCheck),
        )
        @given(fuzz_cases())
        def one(case):
            nonlocal count
            count += 1
            bar.update(1)
            problem = case_problem(case, folder=folder)
            if problem is not None:
                crashes.append((repr(case), problem))
                if len(crashes) <= shown:
                    tqdm.write(f"--- crash {len(crashes)}: {case!r}\n{problem}", file=sys.stderr)

        one()
    return count, crashes


def main(argv: list[str] | None = None) -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--cases", type=int, default=10_000, help="number of cases (10000)")
    ap.add_argument("--seed", type=int, default=20240, help="seed of the cases (20240)")
    ap.add_argument("--show", type=int, default=5, help="crashes printed in full (5)")
    args = ap.parse_args(argv)
    n, crashes = run_fuzz(cases=args.cases, seed_value=args.seed, shown=args.show)
    print(f"fuzz_cases={n} crashes={len(crashes)}")


if __name__ == "__main__":
    main()
