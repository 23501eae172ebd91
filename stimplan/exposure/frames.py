"""The frames of a sequence, the maps they show, and the user's protocol cap.

References
----------
.. [1] common practice: a protocol (ethics or animal-use) may cap the retinal
   irradiance below the standard's limits; it can only add restrictions.
"""

from __future__ import annotations

import weakref
from collections.abc import Callable, Sequence
from dataclasses import dataclass
from typing import Any

import numba as nb
import numpy as np

from .. import validate
from ..cautions import CAUTIONS, EDITION
from ..errors import ConfigError
from ..grid import RetinalGrid
from .discs import check_grid, check_map, peak_location
from .pulses import Pulse, as_pulses, verdict_of

__all__ = [
    "Frame",
    "ProtocolCap",
    "ProtocolResult",
    "MapGroup",
    "as_frames",
    "map_groups",
    "load_map",
    "call_map",
    "accumulate_map",
    "frames_overlap",
    "protocol_result",
]

_TIME_TOL_S = 1e-9


@dataclass(frozen=True, eq=False)
class Frame:
    """One frame of a sequence: a predicted retina and when it is lit.

    Parameters
    ----------
    irradiance_mw_per_mm2 : ndarray or callable
        Retinal irradiance at the frame's laser power, on the shared grid; or a
        zero-argument callable that returns it (a *lazy* frame: a function that
        reads the map from disk or scales a shared base map). A lazy map is
        obtained only when it is needed and is not kept: it may be called
        several times, and must return the same values each time.
    pulses : sequence of Pulse
        When the frame is shown (times from the start of the sequence).
    label : str
        Name shown in reports.
    key : str, optional
        Frames with the same key show the same map: it is obtained from the
        first frame with that key and treated as one map (the others' maps are
        not read). Without a key, frames whose ``irradiance_mw_per_mm2`` is the
        same array or the same callable, or whose callables return the same
        array object, are treated as one map.

    Notes
    -----
    Use :meth:`load_irradiance_mw_per_mm2` to obtain the array of either kind.
    """

    irradiance_mw_per_mm2: np.ndarray | Callable[[], Any]
    pulses: tuple[Pulse, ...]
    label: str = ""
    key: str | None = None

    @property
    def is_lazy(self) -> bool:
        """True if the map is obtained from a callable."""
        return callable(self.irradiance_mw_per_mm2)

    def load_irradiance_mw_per_mm2(self, grid: RetinalGrid | None = None) -> np.ndarray:
        """The frame's map as a checked float32 array (calls a lazy frame's callable).

        Parameters
        ----------
        grid : RetinalGrid, optional
            If given, the map must have its shape.

        Returns
        -------
        ndarray
            Float32, finite, >= 0. Not cached: a lazy frame's callable is
            called on every use.
        """
        shape = None if grid is None else check_grid(grid).shape
        return load_map(self.irradiance_mw_per_mm2, shape, "irradiance_mw_per_mm2")


def call_map(source: Callable[[], Any], field: str) -> Any:
    try:
        return source()
    except ConfigError:
        raise
    except Exception as exc:
        raise ConfigError(
            field,
            source,
            "an irradiance map (mW/mm^2) or a zero-argument callable returning one",
            f"the callable raised {type(exc).__name__}: {exc}",
        ) from exc


def load_map(source: Any, shape: tuple[int, int] | None, field: str) -> np.ndarray:
    value = call_map(source, field) if callable(source) else source
    ndim = 2 if shape is None else None
    return validate.finite_array(field, value, shape=shape, ndim=ndim, lo=0.0, dtype=np.float32)


@dataclass(frozen=True)
class ProtocolCap:
    """Caps of the user's own protocol (e.g. an ethics or animal-use protocol).

    Parameters
    ----------
    peak_irradiance_mw_per_mm2 : float, optional
        Largest retinal irradiance of any sample at any time.
    mean_irradiance_mw_per_mm2 : float, optional
        Largest time-average retinal irradiance of any sample, averaged over
        the sequence (first pulse start to last pulse end).
    name, source : str
        Shown beside the figures.

    A protocol cap can only add restrictions: it can make the verdict
    ``"above"``, never relax the standard.
    """

    peak_irradiance_mw_per_mm2: float | None = None
    mean_irradiance_mw_per_mm2: float | None = None
    name: str = "protocol"
    source: str = ""

    def __post_init__(self) -> None:
        if self.peak_irradiance_mw_per_mm2 is None and self.mean_irradiance_mw_per_mm2 is None:
            raise ConfigError(
                "protocol", None, "a peak or a mean irradiance cap (mW/mm^2), or both"
            )
        for name in ("peak_irradiance_mw_per_mm2", "mean_irradiance_mw_per_mm2"):
            val = getattr(self, name)
            if val is not None:
                object.__setattr__(
                    self, name, validate.physical(f"protocol.{name}", val, "irradiance_mw_per_mm2")
                )


@dataclass(frozen=True)
class ProtocolResult:
    """The sequence measured against a :class:`ProtocolCap`."""

    cap: ProtocolCap
    peak_irradiance_mw_per_mm2: float
    mean_irradiance_mw_per_mm2: float
    peak_ratio: float | None
    mean_ratio: float | None
    worst_ratio: float
    verdict: str
    peak_at_um: tuple[float, float]
    mean_at_um: tuple[float, float]
    edition: str = EDITION

    def summary(self) -> str:
        """The figures with :data:`CAUTIONS`, for standalone output."""
        return f"{self.describe()}\n{CAUTIONS}"

    def describe(self) -> str:
        """One line, without the caution (a part of a summary)."""
        parts = [f"protocol cap '{self.cap.name}'"]
        if self.peak_ratio is not None:
            parts.append(
                f"peak {self.peak_irradiance_mw_per_mm2:.4g} mW/mm² is {self.peak_ratio:.4g} of "
                f"the cap {self.cap.peak_irradiance_mw_per_mm2:.4g}"
            )
        if self.mean_ratio is not None:
            parts.append(
                f"time average {self.mean_irradiance_mw_per_mm2:.4g} mW/mm² is "
                f"{self.mean_ratio:.4g} of the cap {self.cap.mean_irradiance_mw_per_mm2:.4g}"
            )
        parts.append(f"{self.verdict} the cap")
        return "; ".join(parts)


def as_frames(frames: Any, grid: RetinalGrid) -> list[Frame]:
    """Frames with checked pulses, labels and keys; eager maps are checked, lazy ones not read."""
    try:
        items = list(frames)
    except TypeError:
        raise ConfigError("frames", frames, "a list of Frame(irradiance, pulses)") from None
    if not items:
        raise ConfigError("frames", [], "at least one frame")
    out = []
    for k, f in enumerate(items):
        key = None
        if isinstance(f, Frame):
            irr, pulses, label, key = f.irradiance_mw_per_mm2, f.pulses, f.label, f.key
        else:
            try:
                parts = tuple(f)
            except TypeError:
                raise ConfigError(f"frames[{k}]", f, "a Frame or (irradiance, pulses)") from None
            if len(parts) not in (2, 3):
                raise ConfigError(f"frames[{k}]", f, "a Frame or (irradiance, pulses[, label])")
            irr, pulses = parts[0], parts[1]
            label = parts[2] if len(parts) == 3 else ""
        if key is not None and not isinstance(key, str):
            raise ConfigError(f"frames[{k}].key", key, "a string or None")
        if not callable(irr):
            # Checked now, as before; the checked copy (if any) is not kept.
            check_map(irr, grid, f"frames[{k}].irradiance_mw_per_mm2")
        out.append(Frame(irr, as_pulses(pulses, f"frames[{k}].pulses"), str(label), key))
    return out


@dataclass
class MapGroup:
    """Frames that show one map; the map is read from the first one's source."""

    source: Any
    field: str
    frames: list[int]
    key: str | None = None


def map_groups(items: Sequence[Frame]) -> list[MapGroup]:
    """Group frames by map: same key, same array, same callable or same returned array.

    A lazy frame without a key whose callable was not seen before is called once
    here to learn which array it returns; the array is not kept (a weak
    reference recognises it if another frame's callable returns it while it is
    alive elsewhere, e.g. a shared base map).
    """
    groups: list[MapGroup] = []
    by_key: dict[str, int] = {}
    by_callable: dict[int, int] = {}
    by_object: dict[int, tuple[Any, int]] = {}

    def known(obj: Any) -> int | None:
        hit = by_object.get(id(obj))
        if hit is None:
            return None
        ref, gi = hit
        target = ref() if isinstance(ref, weakref.ref) else ref
        return gi if target is obj else None

    def new_group(k: int, source: Any, key: str | None = None) -> int:
        groups.append(MapGroup(source, f"frames[{k}].irradiance_mw_per_mm2", [], key))
        return len(groups) - 1

    for k, f in enumerate(items):
        src = f.irradiance_mw_per_mm2
        if f.key is not None:
            gi = by_key.get(f.key)
            if gi is None:
                gi = by_key[f.key] = new_group(k, src, f.key)
        elif not callable(src):
            gi = known(src)
            if gi is None:
                gi = new_group(k, src)
                by_object[id(src)] = (src, gi)  # alive: ``items`` holds it
        else:
            gi = by_callable.get(id(src))  # alive: ``items`` holds it
            if gi is None:
                obj = call_map(src, f"frames[{k}].irradiance_mw_per_mm2")
                gi = known(obj)
                if gi is None:
                    gi = new_group(k, src)
                    try:
                        by_object[id(obj)] = (weakref.ref(obj), gi)
                    except TypeError:
                        pass  # not weak-referenceable: it cannot be recognised again
                by_callable[id(src)] = gi
                del obj
        groups[gi].frames.append(k)
    return groups


@nb.njit(parallel=True, cache=True, nogil=True)
def accumulate_map(dose, peak, irr, weight, scale, add_peak, lit):  # pragma: no cover
    """``dose += weight * irr``; ``peak += scale * irr`` or ``peak = max(peak, scale * irr)``;
    ``lit[0]`` set if any sample of ``irr`` is non-zero (float64 accumulators)."""
    rows, cols = irr.shape
    n_light = 0
    for i in nb.prange(rows):
        for j in range(cols):
            x = np.float64(irr[i, j])
            if x != 0.0:
                n_light += 1
            if weight > 0:
                dose[i, j] += x * weight
            if scale > 0:
                p = x * scale
                if add_peak:
                    peak[i, j] += p
                elif p > peak[i, j]:
                    peak[i, j] = p
    lit[0] = n_light > 0


def frames_overlap(starts: np.ndarray, durs: np.ndarray, frame_idx: np.ndarray) -> bool:
    order = np.argsort(starts, kind="stable")
    s, e, f = starts[order], (starts + durs)[order], frame_idx[order]
    run_end = np.maximum.accumulate(e)
    clash = (s[1:] < run_end[:-1] - _TIME_TOL_S) & (f[1:] != f[:-1])
    return bool(np.any(clash))


def protocol_result(
    cap: ProtocolCap, peak: np.ndarray, dose: np.ndarray, total_s: float, grid: RetinalGrid
) -> ProtocolResult:
    kp = peak_location(peak)
    kd = peak_location(dose)
    peak_val = float(peak[kp])
    mean_val = float(dose[kd]) / total_s  # mJ/mm^2 / s = mW/mm^2
    pr = (
        None
        if cap.peak_irradiance_mw_per_mm2 is None
        else peak_val / cap.peak_irradiance_mw_per_mm2
    )
    mr = (
        None
        if cap.mean_irradiance_mw_per_mm2 is None
        else mean_val / cap.mean_irradiance_mw_per_mm2
    )
    worst = max(r for r in (pr, mr) if r is not None)
    return ProtocolResult(
        cap=cap,
        peak_irradiance_mw_per_mm2=peak_val,
        mean_irradiance_mw_per_mm2=mean_val,
        peak_ratio=pr,
        mean_ratio=mr,
        worst_ratio=worst,
        verdict=verdict_of(worst),
        peak_at_um=tuple(float(c) for c in grid.point_of(*kp)),
        mean_at_um=tuple(float(c) for c in grid.point_of(*kd)),
    )
