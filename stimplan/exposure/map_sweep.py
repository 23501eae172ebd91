"""The maps of a sequence, read one at a time, and their largest disc powers.

:class:`MapSweep` builds the dose and peak maps of a sequence and finds, for
each lit map and disc diameter, the largest disc power bounded over every
centre (:mod:`stimplan.exposure.map_maxima`), sharing them through a cache.
"""

from __future__ import annotations

from collections.abc import Sequence

import numpy as np

from .disc_bound import PreparedMap
from .discs import DiscIntegrator, peak_location, point_area_mm2
from .frames import accumulate_map, load_map
from .map_maxima import bound_between_samples, centre_slack_um, sums_at_samples

__all__ = ["MapSweep"]


class MapSweep:
    """The maps of a sequence, read one at a time.

    :meth:`accumulate` builds the dose and peak maps; :meth:`maxima` finds, for
    a list of disc diameters, each lit map's largest disc power and its centre
    (full FFT disc-power maps, exact sum at the maximum); :meth:`powers_at`
    sums each lit map's discs exactly at chosen centres.
    """

    def __init__(self, groups, grid, weight_s, max_scale, overlap, cache, progress=None):
        self.groups, self.grid, self.cache = groups, grid, cache
        self.progress = progress
        self.loose = 0  # maps and diameters whose bound between samples stayed loose
        self.weight_s, self.max_scale, self.overlap = weight_s, max_scale, overlap
        self.dose = np.zeros(grid.shape, dtype=np.float64)
        self.peak = np.zeros(grid.shape, dtype=np.float64)
        self.lit: list[int] = []

    def _read(self, gi: int) -> np.ndarray:
        g = self.groups[gi]
        return np.ascontiguousarray(load_map(g.source, self.grid.shape, g.field))

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

    def _map_maxima(self, irr: np.ndarray, key, diameters, integ) -> list[tuple[int, int, float]]:
        g = self.grid
        tags = [(key, g.shape, g.pitch_x_um, g.pitch_y_um, d) for d in diameters]
        tag_of = dict(zip(diameters, tags, strict=True))
        cache = self.cache if (key is not None and self.cache is not None) else {}
        todo = [d for d, t in zip(diameters, tags, strict=True) if t not in cache]
        # maxima shared through the cache still count when their bound stayed loose
        self.loose += sum(1 for t in tags if t in cache and ("loose", t) in cache)
        if todo:
            prepared = PreparedMap.of(irr, g.pitch_x_um, g.pitch_y_um)
            f32 = irr if irr.dtype == np.float32 else irr.astype(np.float32)
            a64 = irr.astype(np.float64, copy=False)
            l1, l2 = float(a64.sum()), float(np.sqrt(np.sum(a64 * a64)))
            spectra: dict = {}
            slack = centre_slack_um(g)
            for d in sorted(todo, key=lambda d: integ.shape_for(d + slack)):
                if integ.is_point(d):
                    r, c = peak_location(irr)
                    value = float(irr[r, c]) * point_area_mm2(d)
                else:
                    # the disc grown by a cell diagonal covers centres between samples
                    dd = d + slack
                    pm = integ.power_map_mw(f32, dd, spectra)
                    r, c = peak_location(pm)
                    exact = float(sums_at_samples(prepared, d, [r], [c])[0])
                    err = integ.error_bound_mw(l1, l2, dd)

                    def plain(d=d):
                        return (
                            integ.power_map_mw(f32, d, spectra),
                            integ.error_bound_mw(l1, l2, d),
                        )

                    res = bound_between_samples(
                        pm,
                        prepared,
                        d,
                        slack_um=slack,
                        err_mw=err,
                        found_mw=exact,
                        row=r,
                        col=c,
                        plain_map=plain,
                    )
                    r, c, value = res.row, res.col, max(res.found_mw, res.bound_mw)
                    if not res.tight:
                        self.loose += 1
                        cache[("loose", tag_of[d])] = True
                cache[tag_of[d]] = (r, c, value)
                if self.progress is not None:
                    self.progress()
        return [cache[t] for t in tags]

    def maxima(self, diameters: Sequence[float]) -> dict[int, list[tuple[int, int, float]]]:
        """Per lit map group, per diameter: centre and bound of the largest disc power.

        One integrator serves every map, so each disc kernel is transformed once.
        """
        integ = DiscIntegrator(self.grid, max(diameters) + centre_slack_um(self.grid))
        out = {
            gi: self._map_maxima(self._read(gi), self.groups[gi].key, diameters, integ)
            for gi in self.lit
        }
        integ.forget()
        return out

    def dose_maxima(self, diameters: Sequence[float], per_map) -> list[tuple[int, int, float]]:
        """The dose map's largest disc energies. With one lit map the dose map is a
        multiple of it (the disc integral is linear), so no transform is needed."""
        if len(self.lit) == 1:
            gi = self.lit[0]
            w = sum(float(self.weight_s[k]) for k in self.groups[gi].frames)
            return [(r, c, value * w) for (r, c, value) in per_map[gi]]
        integ = DiscIntegrator(self.grid, max(diameters) + centre_slack_um(self.grid))
        out = self._map_maxima(self.dose, None, diameters, integ)
        integ.forget()
        return out

    def powers_at(self, diameters, locations) -> dict[int, list[np.ndarray]]:
        """Per lit map group, per diameter: exact disc powers at that diameter's locations
        (fractional sample indices: centres may fall between samples)."""
        g = self.grid
        out = {}
        for gi in self.lit:
            prepared = PreparedMap.of(self._read(gi), g.pitch_x_um, g.pitch_y_um)
            row = []
            for d, locs in zip(diameters, locations, strict=True):
                rr, cc = np.array(locs, dtype=np.float64).reshape(-1, 2).T
                row.append(sums_at_samples(prepared, d, rr, cc))
            out[gi] = row
        return out
