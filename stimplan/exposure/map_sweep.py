"""The maps of a sequence, read one at a time, and their largest disc powers.

:class:`MapSweep` builds the dose and peak maps of a sequence and finds, for
each lit map and disc diameter, the largest disc power bounded over every
centre (:mod:`stimplan.exposure.map_maxima`), sharing them through a cache.
"""

from __future__ import annotations

import math
from collections.abc import Sequence

import numpy as np

from .disc_bound import PreparedMap
from .discs import DiscIntegrator, peak_location, point_area_mm2
from .frames import accumulate_map, load_map
from .map_maxima import (
    CENTRE_TOLERANCE,
    centre_slack_um,
    sums_at_samples,
    whole_map_mw,
    windowed_maximum,
)
from .pooled import PooledMap

#: Largest block (samples) of the first, cheap bound of every map and diameter; a
#: block is at most an eighth of the disc's radius (at least one sample).
COARSE_BLOCK = 16
#: A refined bound tries blocks this many times smaller, before full disc-power maps.
FINE_FACTOR = 4


def _blocks(radius_um: float, pitch_um: float) -> tuple[tuple[int, ...], tuple[int, ...]]:
    """Block sizes (coarse, fine) for a disc: powers of 2, the coarse one at most
    :data:`COARSE_BLOCK` and at most an eighth of the radius, but at least 2 (blocks of
    one sample would cost a transform of the whole map in float64: the refinement goes
    to the disc-power maps over a box instead); the fine one at least 2, or none."""
    m = COARSE_BLOCK
    while m > 2 and m * pitch_um > radius_um / 8.0:
        m //= 2
    fine = m // FINE_FACTOR
    return (m,), ((fine,) if 2 <= fine < m else ())


__all__ = ["MapSweep"]


class _Compact:
    """One map's own maxima, in arrays shared by every map of the sweep (per diameter a
    row per map), so that a sweep of many unkeyed frames keeps a few floats per frame.

    Keys as in a cache: ``d`` (refined ``(row, col, bound)``), ``("pooled", d)``
    (``(row, col, bound, found)``) and ``("loose", d)``.
    """

    def __init__(self, store: dict, index: int, n: int):
        self.store, self.index, self.n = store, index, n

    def _table(self, key, make: bool):
        kind, d = key if isinstance(key, tuple) else ("exact", key)
        width = {"exact": 3, "pooled": 4, "loose": 1}[kind]
        table = self.store.get((kind, d))
        if table is None and make:
            table = self.store[(kind, d)] = np.full((self.n, width), np.nan)
        return table

    def __contains__(self, key) -> bool:
        table = self._table(key, False)
        return table is not None and not np.isnan(table[self.index, 0])

    def __getitem__(self, key):
        if key not in self:
            raise KeyError(key)
        return tuple(float(v) for v in self._table(key, False)[self.index])

    def __setitem__(self, key, value) -> None:
        self._table(key, True)[self.index] = value


def _tight(bound: float, found: float) -> bool:
    return bound <= (1.0 + CENTRE_TOLERANCE) * found or bound <= 0.0


class MapSweep:
    """The maps of a sequence, read one at a time.

    :meth:`accumulate` builds the dose and peak maps; :meth:`maxima` finds, for
    a list of disc diameters, each lit map's largest disc power bounded over
    every centre and where it was found: first by block sums
    (:mod:`stimplan.exposure.pooled`), and, with ``refine=True``, by finer
    blocks and then FFT disc-power maps (over the box of centres whose block
    bound reaches the value found; float64 where that box is small) until the
    bound is within
    :data:`CENTRE_TOLERANCE` of an exact sum; :meth:`powers_at` sums each lit
    map's discs exactly at chosen centres.
    """

    def __init__(self, groups, grid, weight_s, max_scale, overlap, cache, progress=None):
        self.groups, self.grid, self.cache = groups, grid, cache
        self.progress = progress
        self.loose = 0  # maps and diameters whose bound between samples stayed loose
        self.disc_maps = 0  # FFT disc-power maps computed (each over its box of centres)
        self.exact_sums = 0  # exact disc sums evaluated
        self.weight_s, self.max_scale, self.overlap = weight_s, max_scale, overlap
        self.dose = np.zeros(grid.shape, dtype=np.float64)
        self.peak = np.zeros(grid.shape, dtype=np.float64)
        self.lit: list[int] = []
        self._held: tuple | None = None  # (group or "dose", PreparedMap, PooledMap, peak index)
        self._last: tuple | None = None  # (group, map) of the last map accumulate read
        self._own: dict = {}  # maxima of maps with no key and of the dose map (_Compact)
        self._spectra: dict = {}
        self._tight_here: set = set()  # (group or "dose", diameter) refined in this run

    def _read(self, gi: int) -> np.ndarray:
        g = self.groups[gi]
        return np.ascontiguousarray(load_map(g.source, self.grid.shape, g.field))

    def _hold(self, gi):
        """The prepared and pooled forms of one map, kept until another map is read."""
        if self._held is None or self._held[0] != gi:
            self._held = None
            if gi == "dose":
                irr = self.dose
            elif self._last is not None and self._last[0] == gi:
                irr = self._last[1]  # the map accumulate read last: not built a second time
            else:
                irr = self._read(gi)
            self._last = None
            g = self.grid
            prepared = PreparedMap.of(irr, g.pitch_x_um, g.pitch_y_um)
            pooled = PooledMap(prepared.irradiance, g.pitch_x_um, g.pitch_y_um)
            self._held = (gi, prepared, pooled, divmod(int(np.argmax(irr)), irr.shape[1]))
        return self._held[1:]

    def _lit_frames(self, gi: int) -> list[int]:
        return [k for k in self.groups[gi].frames if self.max_scale[k] > 0]

    def accumulate(self) -> None:
        for gi, g in enumerate(self.groups):
            irr = self._read(gi)
            weight = sum(float(self.weight_s[k]) for k in g.frames)
            scales = [float(self.max_scale[k]) for k in g.frames]
            scale = sum(scales) if self.overlap else max(scales, default=0.0)
            lit = np.zeros(1, dtype=np.bool_)
            accumulate_map(self.dose, self.peak, irr, weight, scale, self.overlap, lit)
            if self._lit_frames(gi) and bool(lit[0]):
                self.lit.append(gi)
            self._last = (gi, irr)

    def _sums(self, prepared, d, rows, cols) -> np.ndarray:
        self.exact_sums += len(rows)
        return sums_at_samples(prepared, d, rows, cols)

    def _pooled(self, prepared, pooled, peak_at, d, blocks, start=None, region=None):
        """Bound of the largest disc power from block sums (and the peak and the whole map)
        and the best exact sum at the candidates: ``(row, col, bound, found)``.

        ``start`` is an earlier ``(row, col, bound, found)`` of the same map and disc to
        go on from (its bound and value are kept if better); ``region`` (of
        :meth:`PooledMap.region`) limits the blocks to its box.
        """
        r = d / 2.0
        if start is None:
            # every cell holds at most the peak irradiance over its area inside the disc
            bound = min(
                prepared.peak * math.pi * r * r * 1e-6 * (1.0 + 1e-12), whole_map_mw(prepared)
            )
            rows, cols = [float(peak_at[0])], [float(peak_at[1])]
            found, fr, fc = -1.0, rows[0], cols[0]
        else:
            fr, fc, bound, found = start
            rows, cols = [], []
        for m in blocks:
            if bound <= (1.0 + CENTRE_TOLERANCE) * found:
                break
            pb = pooled.bound(d, m, region)
            bound = min(bound, pb.bound_mw)
            rows, cols = [*rows, *pb.rows.tolist()], [*cols, *pb.cols.tolist()]
            vals = self._sums(prepared, d, rows, cols)
            k = int(np.argmax(vals))
            if vals[k] > found:
                found, fr, fc = float(vals[k]), rows[k], cols[k]
            rows, cols = [], []
        found = max(found, 0.0)
        return fr, fc, max(bound, found), found

    def _cache_for(self, gi):
        """Where a map's maxima are kept: the shared cache for a keyed map, else the sweep's own."""
        key = None if gi == "dose" else self.groups[gi].key
        if key is not None and self.cache is not None:
            return self.cache, key
        index = len(self.groups) if gi == "dose" else gi
        return _Compact(self._own, index, len(self.groups) + 1), None

    def _map_maxima(self, gi, diameters, integ, refine) -> list[tuple[float, float, float]]:
        g = self.grid
        cache, key = self._cache_for(gi)
        own = key is None  # the sweep's own store: keyed by the diameter alone
        tags = [d if own else (key, g.shape, g.pitch_x_um, g.pitch_y_um, d) for d in diameters]
        tag_of = dict(zip(diameters, tags, strict=True))
        # maxima shared through the cache still count when their bound stayed loose
        self.loose += sum(
            1
            for d, t in zip(diameters, tags, strict=True)
            if refine and (gi, d) not in self._tight_here and t in cache and ("loose", t) in cache
        )
        # a run reads a refined maximum only where it asked for one, so that the result
        # does not depend on what a shared cache happens to hold
        want = [t if refine else ("pooled", t) for t in tags]
        todo = [d for d, w in zip(diameters, want, strict=True) if w not in cache]
        if todo:
            self._spectra = {}  # the map's spectra, for this map only
            prepared, pooled, peak_at = self._hold(gi)
            irr = prepared.irradiance
            pitch = max(g.pitch_x_um, g.pitch_y_um)
            slack = centre_slack_um(g)
            for d in sorted(todo, key=lambda d: integ.shape_for(d + slack)):
                t = tag_of[d]
                if integ.is_point(d):
                    r, c = peak_location(irr)
                    value = float(irr[r, c]) * point_area_mm2(d)  # exact: found = bound
                    cache[("pooled", t)] = (float(r), float(c), value, value)
                    cache[t] = (float(r), float(c), value)
                    continue
                if ("pooled", t) not in cache:
                    # (row, col, bound, found): the value found is kept to go on from
                    cache[("pooled", t)] = start = self._pooled(
                        prepared, pooled, peak_at, d, _blocks(d / 2.0, pitch)[0]
                    )
                    if _tight(start[2], start[3]):
                        cache[t] = start[:3]
                if not refine or t in cache:
                    continue
                start = cache[("pooled", t)]
                coarse, fine = _blocks(d / 2.0, pitch)
                # the finer blocks, and the disc-power maps, only where the coarse block
                # bounds reach the value found (every centre elsewhere holds less)
                region = pooled.region(d, coarse[-1], start[3])
                fr, fc, bound, found = self._pooled(
                    prepared, pooled, peak_at, d, fine, start, region
                )
                if _tight(bound, found):
                    cache[t] = (fr, fc, bound)
                else:
                    if fine:
                        region = pooled.region(d, fine[-1], found, within=region)
                    cache[t] = self._fft_maximum(prepared, pooled, d, integ, t, cache, region)
                    if self.progress is not None:
                        self.progress()
            pooled.forget()
            integ.forget()  # kernel spectra are not held across maps: memory set by the grid
        for d, t in zip(diameters, tags, strict=True):
            if refine or (t in cache and cache[t] == cache[("pooled", t)][:3]):
                self._tight_here.add((gi, d))
        return [cache[w][:3] for w in want]

    def _fft_maximum(
        self, prepared, pooled, d, integ, tag, cache, box
    ) -> tuple[float, float, float]:
        """The largest disc power from FFT disc-power maps over ``box`` (``(rows, cols,
        rest)`` of :meth:`PooledMap.region`), by :func:`windowed_maximum`."""
        res, maps = windowed_maximum(
            prepared,
            d,
            integ,
            box=box,
            map_norms=pooled.norms(),
            spectra=self._spectra,
            slack_um=centre_slack_um(self.grid),
        )
        self.disc_maps += maps
        self.exact_sums += 1
        if not res.tight:
            self.loose += 1
            cache[("loose", tag)] = True
        return res.row, res.col, max(res.found_mw, res.bound_mw)

    def maxima(
        self, diameters: Sequence[float], *, refine: bool = False
    ) -> dict[int, list[tuple[float, float, float]]]:
        """Per lit map group, per diameter: centre and bound of the largest disc power.

        Without ``refine`` the bound may be loose (block sums only); with it,
        every bound is within :data:`CENTRE_TOLERANCE` of an exact sum unless
        the search between samples stopped at its budget (counted in
        :attr:`loose`). One integrator serves every map, so each disc kernel is
        transformed once.
        """
        integ = DiscIntegrator(self.grid, max(diameters) + centre_slack_um(self.grid))
        self._spectra: dict = {}
        out = {gi: self._map_maxima(gi, diameters, integ, refine) for gi in self.lit}
        integ.forget()
        self._spectra = {}
        return out

    def is_tight(self, diameter_um: float) -> bool:
        """Whether every lit map's bound at this diameter is refined (not block sums only)."""
        return all(self._refined(gi, diameter_um) for gi in self.lit)

    def dose_is_tight(self, diameter_um: float) -> bool:
        """Whether the dose map's bound at this diameter is refined (always, with one lit
        map: it is then a multiple of that map's)."""
        return len(self.lit) <= 1 or self._refined("dose", diameter_um)

    def _refined(self, gi, diameter_um: float) -> bool:
        return (gi, diameter_um) in self._tight_here

    def dose_maxima(self, diameters: Sequence[float], per_map, *, refine: bool = False):
        """The dose map's largest disc energies. With one lit map the dose map is a
        multiple of it (the disc integral is linear), so no transform is needed."""
        if len(self.lit) == 1:
            gi = self.lit[0]
            w = sum(float(self.weight_s[k]) for k in self.groups[gi].frames)
            return [(r, c, value * w) for (r, c, value) in per_map[gi]]
        integ = DiscIntegrator(self.grid, max(diameters) + centre_slack_um(self.grid))
        self._spectra = {}
        out = self._map_maxima("dose", diameters, integ, refine)
        integ.forget()
        self._spectra = {}
        return out

    def powers_at(self, diameters, locations) -> dict[int, list[np.ndarray]]:
        """Per lit map group, per diameter: exact disc powers at that diameter's locations
        (fractional sample indices: centres may fall between samples)."""
        out = {}
        for gi in self.lit:
            prepared = self._hold(gi)[0]
            row = []
            for d, locs in zip(diameters, locations, strict=True):
                rr, cc = np.array(locs, dtype=np.float64).reshape(-1, 2).T
                row.append(self._sums(prepared, d, rr, cc))
            out[gi] = row
        return out
