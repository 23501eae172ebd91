"""IFTA time per iteration against the FFT floor and a textbook loop, measured in one run.

Prints one line per size::

    size=1024 ifta_over_floor=1.31 textbook_over_ifta=7.9

* floor: one forward and one inverse complex64 ``scipy.fft`` of the same size on
  all cores (in place), timed in alternation with the IFTA (median of the
  rounds' ratios, see :func:`ifta_and_floor`);
* ifta: one iteration of stimplan's Gerchberg–Saxton loop (fused kernels);
* textbook: a plain NumPy Gerchberg–Saxton iteration (complex128, ``numpy.fft``,
  ``fftshift`` and new arrays each step).
"""

from __future__ import annotations

import argparse
import sys
from pathlib import Path

import numpy as np
import scipy.fft as sfft

sys.path.insert(0, str(Path(__file__).resolve().parent))
from _timing import best_time

from stimplan.grid import RetinalGrid
from stimplan.holography.ifta import IftaSettings, run_ifta
from stimplan.optics.target import Target


def _target(n: int) -> tuple[np.ndarray, np.ndarray]:
    rng = np.random.default_rng(0)
    t = np.zeros((n, n), np.float32)
    t[n // 4 : n // 2, n // 3 : n // 2] = rng.uniform(0.5, 1.0, (n // 4, n // 2 - n // 3))
    yy, xx = np.mgrid[:n, :n] - n / 2
    src = np.exp(-(xx**2 + yy**2) / (n / 3) ** 2).astype(np.float32)
    return t, src


def ifta_and_floor(n: int, iterations: int = 20, rounds: int = 7) -> tuple[float, float]:
    """Per-iteration IFTA time and per-pair FFT floor, measured in alternation.

    Each round times the floor as ``iterations`` forward and inverse pairs, then
    the IFTA as the difference of a run of ``iterations + 1`` iterations and a run
    of one (so both are averages over ``iterations`` steps, taken seconds apart).
    The ratio is the median of the rounds' ratios: on a shared machine the speed
    of both drifts together within a round, not across rounds.
    """
    t, src = _target(n)
    target = Target.from_intensity(t, RetinalGrid((n, n), 1.0, 1.0))
    st_long = IftaSettings(method="gs", iterations=iterations + 1)
    st_short = IftaSettings(method="gs", iterations=1)
    run_ifta(target, src, st_short)  # compile the kernels
    x = (np.random.default_rng(1).standard_normal((n, n)) + 0j).astype(np.complex64)

    def pairs():
        nonlocal x
        for _ in range(iterations):
            x = sfft.fft2(x, norm="ortho", workers=-1, overwrite_x=True)
            x = sfft.ifft2(x, norm="ortho", workers=-1, overwrite_x=True)

    pairs()
    ratios, its = [], []
    for _ in range(rounds):
        floor = best_time(pairs, 1) / iterations
        it = (
            best_time(lambda: run_ifta(target, src, st_long), 1)
            - best_time(lambda: run_ifta(target, src, st_short), 1)
        ) / iterations
        ratios.append(it / floor)
        its.append(it)
    return float(np.median(its)), float(np.median(ratios))


def textbook_time(n: int, iterations: int = 3) -> float:
    t, src = _target(n)
    amp_t = np.sqrt(t.astype(np.float64))
    amp_s = src.astype(np.float64)
    rng = np.random.default_rng(0)

    def loop():
        e = amp_s * np.exp(1j * rng.uniform(0, 2 * np.pi, (n, n)))
        for _ in range(iterations):
            f = np.fft.fftshift(np.fft.fft2(np.fft.ifftshift(e)))
            f = amp_t * np.exp(1j * np.angle(f))
            e = np.fft.fftshift(np.fft.ifft2(np.fft.ifftshift(f)))
            e = amp_s * np.exp(1j * np.angle(e))
        return e

    return best_time(loop, 2) / iterations


def main(argv=None) -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--sizes", type=int, nargs="+", default=[1024, 2048])
    args = ap.parse_args(argv)
    for n in args.sizes:
        it, over_floor = ifta_and_floor(n)
        tb = textbook_time(n)
        print(
            f"size={n} ifta_over_floor={over_floor:.2f} textbook_over_ifta={tb / it:.1f}",
            flush=True,
        )


if __name__ == "__main__":
    main()
