"""Peak memory of planning a sequence, estimated before any computing.

A plan holds three kinds of arrays at once:

- the working planes of the holograms being computed, one set per parallel
  lane: the design planes on the SLM grid and the prediction planes on the
  oversampled retinal grid;
- the finished holograms kept for the frames (in memory, or one at a time
  when they are spooled to disk);
- the exposure assessment: an irradiance map and its padded disc-sum
  transforms on the oversampled grid.

The bytes per sample of each kind (and a fixed overhead) were measured with
``benchmarks/memory_model.py`` (peak resident set of a child process, less
that of the imports) and rounded up; the benchmark prints the ratio of this
estimate to the measurement, which stays above 1.
"""

from __future__ import annotations

import os
from dataclasses import dataclass

from ..batch import parallel_workers
from ..errors import ConfigError
from .spool import BYTES_PER_SLM_PIXEL, MEMORY_BUDGET_MB

__all__ = [
    "MemoryEstimate",
    "MemoryLimitError",
    "available_bytes",
    "check_memory",
    "estimate_peak_bytes",
    "DEFAULT_RAM_SHARE",
]

#: Fixed cost of planning beyond the imports (compiled kernels, FFT plans, caches).
OVERHEAD_BYTES = 160 * 2**20
#: Working bytes of one hologram job per SLM pixel (design planes: field, target,
#: regions, phase and level maps).
JOB_BYTES_PER_SLM_PIXEL = 96
#: Working bytes of one hologram job per oversampled retinal sample (the padded
#: complex64 field, its transform, the irradiance, the readout weights).
JOB_BYTES_PER_SAMPLE = 160
#: Extra working bytes of a prediction with fringing fields (``slm.fringing_um > 0``) per
#: oversampled retinal sample: the complex64 accumulator of the sub-pixel components, its
#: own complex64 work plane and the ideal SLM's map for the crosstalk line (20, rounded up).
FRINGING_BYTES_PER_SAMPLE = 24
#: ... and per SLM pixel: the smoothed phase, its half-smoothed rows and the cancelled
#: phase terms (float32, 12, rounded up).
FRINGING_BYTES_PER_SLM_PIXEL = 16
#: Bytes one finished hologram keeps per oversampled retinal sample (its prediction,
#: the mask's prediction and the readout maps; measured about 26).
STORED_BYTES_PER_SAMPLE = 32
#: Working bytes of the exposure assessment per oversampled retinal sample: the map
#: with its higher-order margin, the dose and peak maps, the summed-area table and
#: the padded disc-sum transforms (measured about 400).
EXPOSURE_BYTES_PER_SAMPLE = 480
#: Default share of the available memory a plan may use.
DEFAULT_RAM_SHARE = 0.8


class MemoryLimitError(ConfigError):
    """The plan would need more memory than allowed (a :class:`ConfigError`, exit 1)."""


@dataclass(frozen=True)
class MemoryEstimate:
    """Estimated peak bytes of a plan, by kind.

    Attributes
    ----------
    lanes : int
        Holograms computed at once (parallel worker threads, at most one per stimulus).
    overhead_bytes : int
        Fixed cost of planning.
    jobs_bytes : int
        Working planes of ``lanes`` hologram jobs.
    stored_bytes : int
        Finished holograms held at once.
    exposure_bytes : int
        The exposure assessment's working planes.
    slm_pixels, retinal_samples : int
        Samples of the SLM grid and of the oversampled retinal grid.
    """

    lanes: int
    overhead_bytes: int
    jobs_bytes: int
    stored_bytes: int
    exposure_bytes: int
    slm_pixels: int
    retinal_samples: int

    @property
    def total_bytes(self) -> int:
        """Peak: holograms in flight and those kept, or the exposure with those kept."""
        return self.overhead_bytes + self.stored_bytes + max(self.jobs_bytes, self.exposure_bytes)

    def advice(self) -> str:
        """How to lower the estimate, largest lever first."""
        return (
            "lower hologram.oversample (memory goes with its square), use fewer SLM "
            "pixels (optics.slm.pixels_x / pixels_y), or fewer worker threads "
            f"(now {self.lanes}; set taskset or the CPU affinity)"
        )


def estimate_peak_bytes(spec, *, lanes: int | None = None, n_holograms: int | None = None):
    """Estimate the peak memory of :func:`stimplan.plan.plan_sequence` for ``spec``.

    Parameters
    ----------
    spec : SequenceSpec
        The validated sequence.
    lanes : int, optional
        Parallel hologram jobs; by default the usable cores.
    n_holograms : int, optional
        Distinct holograms kept; by default one per stimulus of the file. When
        they would exceed the spool budget, they are spooled and one is held.

    Returns
    -------
    MemoryEstimate
    """
    slm = spec.system.slm
    n_slm = int(slm.pixels_x) * int(slm.pixels_y)
    n_ret = n_slm * int(spec.oversample) ** 2
    count = len(spec.stimuli) if n_holograms is None else max(1, int(n_holograms))
    lanes = min(count, parallel_workers() if lanes is None else max(1, int(lanes)))
    # the rule by which plan_sequence spools its holograms to disk
    if count * n_slm * BYTES_PER_SLM_PIXEL * spec.oversample**2 / 4 > MEMORY_BUDGET_MB * 2**20:
        count = lanes  # spooled: only those in flight are in memory
    per_pixel, per_sample = JOB_BYTES_PER_SLM_PIXEL, JOB_BYTES_PER_SAMPLE
    if float(getattr(slm, "fringing_um", 0.0)) > 0:
        # the sub-pixel components are transformed one at a time (no q-times finer plane)
        per_pixel += FRINGING_BYTES_PER_SLM_PIXEL
        per_sample += FRINGING_BYTES_PER_SAMPLE
    return MemoryEstimate(
        lanes=lanes,
        overhead_bytes=OVERHEAD_BYTES,
        jobs_bytes=lanes * (per_pixel * n_slm + per_sample * n_ret),
        stored_bytes=count * STORED_BYTES_PER_SAMPLE * n_ret,
        exposure_bytes=EXPOSURE_BYTES_PER_SAMPLE * n_ret,
        slm_pixels=n_slm,
        retinal_samples=n_ret,
    )


def available_bytes() -> int | None:
    """Memory available to new allocations (``MemAvailable`` of /proc/meminfo), or None."""
    try:
        with open("/proc/meminfo") as fh:
            for line in fh:
                if line.startswith("MemAvailable:"):
                    return int(line.split()[1]) * 1024
    except (OSError, ValueError, IndexError):
        pass
    try:
        return os.sysconf("SC_AVPHYS_PAGES") * os.sysconf("SC_PAGE_SIZE")
    except (ValueError, OSError, AttributeError):  # pragma: no cover - not POSIX
        return None


def check_memory(spec, *, limit_bytes: float | None = None, lanes: int | None = None):
    """Refuse a plan whose estimated peak memory is over ``limit_bytes``.

    Parameters
    ----------
    spec : SequenceSpec
    limit_bytes : float, optional
        The ceiling; by default :data:`DEFAULT_RAM_SHARE` of the available memory
        (no check when that is unknown).
    lanes : int, optional
        Parallel hologram jobs, as in :func:`estimate_peak_bytes`.

    Returns
    -------
    MemoryEstimate

    Raises
    ------
    MemoryLimitError
        With the estimate, the limit and how to lower the estimate.
    """
    est = estimate_peak_bytes(spec, lanes=lanes)
    if limit_bytes is None:
        avail = available_bytes()
        if avail is None:
            return est
        limit_bytes = DEFAULT_RAM_SHARE * avail
        whence = f"{DEFAULT_RAM_SHARE:.0%} of the {avail / 2**30:.1f} GiB available"
    else:
        whence = "the given limit"
    if est.total_bytes > limit_bytes:
        raise MemoryLimitError(
            "hologram.oversample",
            spec.oversample,
            f"a plan within {limit_bytes / 2**30:.2f} GiB ({whence})",
            f"the plan needs about {est.total_bytes / 2**30:.2f} GiB for "
            f"{est.slm_pixels} SLM pixels x oversample {spec.oversample}^2 on "
            f"{est.lanes} thread(s); {est.advice()}; or raise the limit with --max-memory-gb",
        )
    return est
