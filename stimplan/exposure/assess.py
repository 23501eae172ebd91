"""A whole sequence of predicted retinas against the retinal limits.

The worst ratio reported is an **upper bound** over every centre (also between
samples; the map is uniform within each sample) and every acceptance angle
from alpha_min = 1.5 mrad to 100 mrad, continuously:

* **Angles.** The disc power at a centre never falls when the disc grows, and
  the limit never falls when the acceptance angle grows
  (:func:`stimplan.exposure.mpe.thermal_limit_j_per_m2`). So between two
  evaluated angles ``a < b`` the ratio at any angle is at most (powers at
  ``b``) / (limits at ``a``). Intervals whose bound exceeds the values at their
  ends by more than the tolerance are split at their geometric middle and the
  new angles evaluated, until the bound is within the tolerance (branch and
  bound on the angle).
* **Centres.** A centre anywhere in a sample's cell is within half the cell's
  diagonal of the sample, so its disc lies inside the sample's disc grown by
  the diagonal. Each map's largest disc power over every centre is therefore
  bounded by the largest value of the FFT disc-power map of the grown disc
  (no search that could miss). Where that bound is more than
  :data:`CENTRE_TOLERANCE` above the exact value found, the cells that may
  hold more are searched by branch and bound
  (:func:`stimplan.exposure.disc_bound.bound_over_cells`) within a budget;
  past the budget the grown-disc bound is kept, which is valid but looser,
  and a note says so. The rules are
  bounded by placing every map's largest disc power at one place
  (pulses of different maps are taken to coincide), with every energy cut to
  the largest disc energy of the dose map. With one map this is exact; with
  several it can only err high.
* **Found values.** At the largest disc powers of each map and of the dose map,
  the rules are also evaluated exactly; the place, the time window and the
  found ratio are reported beside the bound.

References
----------
.. [1] ICNIRP, Health Phys. 105, 271-295 (2013), varying acceptance angle.
.. [2] Directive 2006/25/EC, Annex II, Tables 2.2-2.6.
.. [3] A. H. Land and A. G. Doig, "An automatic method of solving discrete
   programming problems", Econometrica 28, 497-520 (1960) (branch and bound).
"""

from __future__ import annotations

import math
from collections.abc import Callable, Iterable, Sequence
from dataclasses import dataclass, field, replace
from typing import Any

import numpy as np

from .. import validate
from ..cautions import CAUTION_SHORT, CAUTIONS, EDITION
from ..errors import ConfigError
from ..grid import RetinalGrid
from .discs import check_grid, peak_location
from .factors import ALPHA_MAX_MRAD, ALPHA_MIN_MRAD, check_wavelength
from .frames import (
    Frame,
    MapGroup,
    ProtocolCap,
    ProtocolResult,
    as_frames,
    frames_overlap,
    map_groups,
    protocol_result,
)
from .map_maxima import (
    CENTRE_TOLERANCE,
)
from .map_sweep import MapSweep
from .pulses import (
    RULE_LABELS,
    RULES,
    Pulse,
    RuleResult,
    binding_rule,
    counted_pulses,
    empty_rule,
    margin_of,
    merge_rules,
    timeline_arrays,
    timeline_rules,
    verdict_of,
)
from .retina import HUMAN_EYE, EyeModel, basis_text, check_eye, retinal_image_diameter_um

__all__ = [
    "AngleResult",
    "ExposureAssessment",
    "default_acceptance_angles_mrad",
    "assess_sequence",
    "evaluate_map",
]

#: Relative gap allowed between the bound over an angle interval and its ends.
ANGLE_TOLERANCE = 0.01
_MAX_LEVELS = 12


def default_acceptance_angles_mrad(n: int = 7) -> tuple[float, ...]:
    """The starting acceptance angles: ``n`` log-spaced from 1.5 to 100 mrad.

    The assessment adds angles where the bound between two of them is loose.

    References
    ----------
    .. [1] Directive 2006/25/EC, Annex II, Table 2.5: alpha_min = 1.5 mrad,
       alpha_max = 100 mrad.
    """
    k = validate.integer("n", n, lo=2)
    return tuple(float(a) for a in np.geomspace(ALPHA_MIN_MRAD, ALPHA_MAX_MRAD, k))


@dataclass(frozen=True)
class AngleResult:
    """Figures at one evaluated acceptance angle (every map's largest disc power
    placed together, the limits of this angle)."""

    alpha_mrad: float
    diameter_um: float
    max_disc_power_mw: float
    worst_ratio: float
    rule: str
    edition: str = EDITION


@dataclass(frozen=True, eq=False)
class ExposureAssessment:
    """A sequence of frames assessed against the retinal limits.

    Attributes
    ----------
    n_maps : int
        Distinct irradiance maps assessed (frames showing one hologram share
        a map; the sequence's frame count is the plan's).
    n_pulses : int
        Pulses of the whole sequence, every one counted.
    worst_ratio : float
        Upper bound of the exposure/limit ratio of the standard over every
        sample centre and acceptance angle (1.5-100 mrad) and all three rules.
    found_ratio : float
        The largest ratio evaluated exactly at one place (``worst`` says where);
        ``worst_ratio / found_ratio`` is the bound's gap.
    rules : dict of str to RuleResult
        Per rule: ``ratio`` is its bound, the other fields the place found.
    protocol : ProtocolResult or None
        The protocol cap, reported beside the standard.
    protocol_ratio : float or None
        The protocol cap's worst ratio.
    binding_limit : str
        What decides the verdict: ``"standard"`` or ``"protocol"``.
    verdict : str
        ``"above"`` if the standard or the protocol cap is exceeded.
    """

    wavelength_nm: float
    grid: RetinalGrid = field(repr=False)
    n_maps: int
    n_pulses: int
    duration_s: float
    dose_map_mj_per_mm2: np.ndarray = field(repr=False)
    peak_irradiance_map_mw_per_mm2: np.ndarray = field(repr=False)
    rules: dict[str, RuleResult]
    worst: RuleResult
    worst_ratio: float
    found_ratio: float
    margin: float
    binding_rule: str
    verdict_standard: str
    protocol: ProtocolResult | None
    verdict: str
    angles: tuple[AngleResult, ...]
    basis: str
    notes: tuple[str, ...]
    edition: str = EDITION
    caution: str = field(default=CAUTION_SHORT, repr=False)
    #: The work done: ``disc_maps`` (FFT disc-power maps), ``exact_sums`` (exact
    #: disc sums at chosen centres), ``angles`` (acceptance angles evaluated).
    work: dict = field(default_factory=dict, repr=False, compare=False)

    @property
    def max_dose_mj_per_mm2(self) -> float:
        return float(self.dose_map_mj_per_mm2.max())

    @property
    def peak_irradiance_mw_per_mm2(self) -> float:
        return float(self.peak_irradiance_map_mw_per_mm2.max())

    @property
    def protocol_ratio(self) -> float | None:
        return None if self.protocol is None else self.protocol.worst_ratio

    @property
    def binding_limit(self) -> str:
        """``"protocol"`` if the protocol cap's ratio is the higher, else ``"standard"``."""
        p = self.protocol_ratio
        return "protocol" if p is not None and p > self.worst_ratio else "standard"

    @property
    def binding_ratio(self) -> float:
        """The ratio of the limit that binds (the standard's or the protocol cap's)."""
        p = self.protocol_ratio
        return max(self.worst_ratio, p if p is not None else 0.0)

    def ratio(self, rule: str) -> float:
        return self.rules[rule].ratio

    def worst_ratio_per_mw(self, laser_power_mw: float) -> float:
        """Worst ratio per mW of laser power, given the power the maps were computed at."""
        p = validate.number("laser_power_mw", laser_power_mw, lo=0.0, lo_open=True)
        return self.worst_ratio / p

    def protocol_ratio_per_mw(self, laser_power_mw: float) -> float | None:
        p = validate.number("laser_power_mw", laser_power_mw, lo=0.0, lo_open=True)
        return None if self.protocol is None else self.protocol.worst_ratio / p

    def binding_text(self) -> str:
        """One line naming the limit that binds, its ratio and the figure that decides."""
        if self.binding_limit == "protocol":
            return f"{self.protocol.describe()} (the protocol cap binds)"
        w = self.worst
        text = (
            f"the standard's {RULE_LABELS[self.binding_rule]} binds: {self.worst_ratio:.3g} of "
            f"the limit (upper bound over centres and acceptance angles)"
        )
        if w.x_um is not None:
            text += (
                f"; found {self.found_ratio:.3g} at x = {w.x_um:.0f} µm, y = {w.y_um:.0f} µm, "
                f"α = {w.alpha_mrad:.3g} mrad, {w.window_duration_ms:.4g} ms from "
                f"{w.window_start_ms:.4g} ms"
            )
        return text

    def summary(self) -> str:
        lines = [
            f"Exposure estimate ({self.edition})",
            f"  {self.wavelength_nm:g} nm, {self.n_maps} irradiance map(s), "
            f"{self.n_pulses} pulse(s) over {self.duration_s:.4g} s",
            f"  peak retinal irradiance {self.peak_irradiance_mw_per_mm2:.4g} mW/mm², "
            f"largest dose {self.max_dose_mj_per_mm2:.4g} mJ/mm²",
        ]
        lines += ["  " + self.rules[r].describe() for r in RULES]
        lines.append(
            f"  standard: at most {self.worst_ratio:.3g} of the limit "
            f"({RULE_LABELS[self.binding_rule]}), margin {self.margin:.3g}x, "
            f"{self.verdict_standard} the limit"
        )
        if self.protocol is not None:
            lines.append("  " + self.protocol.describe())
        lines.append(f"  binding: {self.binding_text()}")
        lines.append(f"  overall verdict: {self.verdict}")
        lines.append("  Basis: " + self.basis)
        lines += ["  Note: " + n for n in self.notes]
        lines.append(CAUTIONS)
        return "\n".join(lines)

    def as_dict(self) -> dict[str, Any]:
        """Scalars for a manifest or a report (no arrays)."""

        def rule(r: RuleResult) -> dict[str, Any]:
            return {
                "ratio": r.ratio,
                "found_ratio": r.found_ratio,
                "alpha_mrad": r.alpha_mrad,
                "x_um": r.x_um,
                "y_um": r.y_um,
                "window_start_ms": r.window_start_ms,
                "window_duration_ms": r.window_duration_ms,
                "n_pulses": r.n_pulses,
                "c_p": r.c_p,
            }

        out: dict[str, Any] = {
            "edition": self.edition,
            "wavelength_nm": self.wavelength_nm,
            "duration_s": self.duration_s,
            "n_maps": self.n_maps,
            "n_pulses": self.n_pulses,
            "worst_ratio": self.worst_ratio,
            "found_ratio": self.found_ratio,
            "protocol_ratio": self.protocol_ratio,
            "binding_limit": self.binding_limit,
            "binding": self.binding_text(),
            "margin": self.margin,
            "binding_rule": self.binding_rule,
            "verdict_standard": self.verdict_standard,
            "verdict": self.verdict,
            "peak_irradiance_mw_per_mm2": self.peak_irradiance_mw_per_mm2,
            "max_dose_mj_per_mm2": self.max_dose_mj_per_mm2,
            "rules": {r: rule(self.rules[r]) for r in RULES},
            "basis": self.basis,
            "notes": list(self.notes),
            "caution": CAUTIONS,
        }
        if self.protocol is not None:
            out["protocol"] = {
                "name": self.protocol.cap.name,
                "peak_ratio": self.protocol.peak_ratio,
                "mean_ratio": self.protocol.mean_ratio,
                "worst_ratio": self.protocol.worst_ratio,
                "verdict": self.protocol.verdict,
            }
        return out


@dataclass(frozen=True)
class _Timeline:
    """A sequence's pulses, which map each shows, and what rule 3 counts."""

    starts_s: np.ndarray
    durs_s: np.ndarray
    scales: np.ndarray
    frame_idx: np.ndarray
    group_of: np.ndarray
    lit_frames: np.ndarray
    wavelength_nm: float
    eye: EyeModel
    counted: dict

    def rules(self, power_of_group, limit_angle: float, cap_mj: float = math.inf):
        """Rules 1-3 with the disc power ``power_of_group(gi)`` of each map group."""
        fp = np.zeros(len(self.group_of))
        fp[self.lit_frames] = [power_of_group(self.group_of[k]) for k in self.lit_frames]
        return timeline_rules(
            self.starts_s,
            self.durs_s,
            fp[self.frame_idx] * self.scales,
            self.wavelength_nm,
            limit_angle,
            self.eye,
            self.counted,
            energy_cap_mj=cap_mj,
            map_of_pulse=self.group_of[self.frame_idx],
        )


def _check_angles(alphas_mrad: Iterable[float] | None) -> list[float]:
    if alphas_mrad is None:
        return list(default_acceptance_angles_mrad())
    out = set()
    for k, a in enumerate(alphas_mrad):
        x = validate.number(f"alphas_mrad[{k}]", a, lo=ALPHA_MIN_MRAD, hi=ALPHA_MAX_MRAD)
        out.add(x)
    # the bound covers the whole range, so both ends are always evaluated
    return sorted(out | {ALPHA_MIN_MRAD, ALPHA_MAX_MRAD})


def assess_sequence(
    frames: Sequence[Frame],
    grid: RetinalGrid,
    wavelength_nm: float,
    *,
    eye: EyeModel = HUMAN_EYE,
    protocol: ProtocolCap | None = None,
    alphas_mrad: Iterable[float] | None = None,
    subject: str | None = None,
    maxima_cache: dict | None = None,
    tolerance: float = ANGLE_TOLERANCE,
    progress: Callable[[], None] | None = None,
) -> ExposureAssessment:
    """Assess a sequence of frames against the retinal limits (varying acceptance angle).

    Parameters
    ----------
    frames : sequence of Frame or (irradiance, pulses)
        Each frame's predicted retinal irradiance (mW/mm^2 on ``grid``; an array
        or a zero-argument callable returning one) and its pulses (ms).
    grid : RetinalGrid
        Shared sampling of every map.
    wavelength_nm : float
        700-1200 nm; other wavelengths are refused.
    eye : EyeModel
        Reference eye (f = 17 mm); give it the ocular transmission the
        prediction used, so that it cancels.
    protocol : ProtocolCap, optional
        A cap of the user's protocol, reported beside the standard.
    alphas_mrad : iterable of float, optional
        Starting acceptance angles within 1.5-100 mrad (both ends are always
        added); more are added where the bound between two is loose.
    subject : str, optional
        The eye the stimulus is for (``"rat"``), named in the basis.
    maxima_cache : dict, optional
        Shared between calls that show the same keyed maps: each keyed map's
        largest disc powers are found once per grid and diameter.
    tolerance : float
        Largest relative gap between the bound over an angle interval and the
        values at its ends (default 1 %).
    progress : callable, optional
        Called with no argument after each disc-power map is computed (their
        number is not known in advance).

    Returns
    -------
    ExposureAssessment
        ``worst_ratio`` is an upper bound over all sample centres and all
        acceptance angles from 1.5 to 100 mrad; ``found_ratio`` the largest
        ratio evaluated exactly at one place.

    References
    ----------
    .. [1] ICNIRP, Health Phys. 105, 271-295 (2013).
    .. [2] Directive 2006/25/EC, Annex II, Tables 2.2-2.6.
    """
    grid = check_grid(grid)
    lam = check_wavelength(wavelength_nm)
    eye = check_eye(eye)
    tol = validate.number("tolerance", tolerance, lo=1e-4, hi=0.5)
    if protocol is not None and not isinstance(protocol, ProtocolCap):
        raise ConfigError("protocol", protocol, "a ProtocolCap or None")
    items = as_frames(frames, grid)
    all_pulses: list[Pulse] = []
    frame_of: list[int] = []
    for k, f in enumerate(items):
        all_pulses.extend(f.pulses)
        frame_of.extend([k] * len(f.pulses))
    if not all_pulses:
        raise ConfigError("frames", "no pulses", "at least one pulse in some frame")
    starts, durs = timeline_arrays(all_pulses, "frames[].pulses")
    scales = np.array([p.scale for p in all_pulses], dtype=np.float64)
    frame_idx = np.asarray(frame_of, dtype=np.int64)
    total = float(np.max(starts + durs) - starts.min())
    n_f = len(items)
    weight_s = np.bincount(frame_idx, weights=scales * durs, minlength=n_f)
    max_scale = np.zeros(n_f)
    np.maximum.at(max_scale, frame_idx, scales)
    overlap = frames_overlap(starts, durs, frame_idx)
    counted = counted_pulses(starts, durs, lam)
    angles = _check_angles(alphas_mrad)

    groups: list[MapGroup] = map_groups(items)
    group_of = np.empty(n_f, dtype=np.int64)
    for gi, g in enumerate(groups):
        group_of[g.frames] = gi
    sweep = MapSweep(groups, grid, weight_s, max_scale, overlap, maxima_cache, progress)
    sweep.accumulate()
    dose, peak = sweep.dose, sweep.peak
    notes: list[str] = []
    if overlap:
        notes.append("Pulses of different frames overlap in time: the peak map adds them.")

    prot = None if protocol is None else protocol_result(protocol, peak, dose, total, grid)
    if not sweep.lit:
        rules = {r: empty_rule(r, angles[0]) for r in RULES}
        return _result(
            lam,
            grid,
            items,
            all_pulses,
            total,
            dose,
            peak,
            rules,
            rules,
            0.0,
            prot,
            (),
            eye,
            subject,
            notes,
            [],
        )

    diam = {a: retinal_image_diameter_um(a, eye) for a in angles}
    per_map: dict[float, dict[int, tuple[int, int, float]]] = {}
    dose_max: dict[float, tuple[int, int, float]] = {}

    ladder = list(angles)

    def measure(new: list[float], refine: bool = False) -> None:
        ds = [diam[a] for a in new]
        found = sweep.maxima(ds, refine=refine)
        for j, a in enumerate(new):
            per_map[a] = {gi: found[gi][j] for gi in sweep.lit}
        if len(sweep.lit) == 1:
            for a, m in zip(new, sweep.dose_maxima(ds, found), strict=True):
                dose_max[a] = m
            return
        starting = [a for a in new if a in ladder]
        if starting:
            dmax = sweep.dose_maxima([diam[a] for a in starting], found, refine=refine)
            for a, m in zip(starting, dmax, strict=True):
                dose_max[a] = m
        # a disc energy never falls as the disc grows: the next starting angle above
        # bounds the dose map's largest disc energy at an added angle
        for a in new:
            if a not in ladder:
                dose_max[a] = dose_max[min(b for b in ladder if b >= a)]

    lit_frames = np.flatnonzero(np.isin(group_of, sweep.lit) & (max_scale > 0))
    tl = _Timeline(starts, durs, scales, frame_idx, group_of, lit_frames, lam, eye, counted)

    def virtual(powers_angle: float, limit_angle: float) -> dict[str, RuleResult]:
        """Rules with every map's largest disc power at ``powers_angle`` placed together."""
        at = per_map[powers_angle]
        return tl.rules(lambda gi: at[gi][2], limit_angle, dose_max[powers_angle][2])

    def tight(a: float) -> bool:
        # an added angle's dose bound is that of the starting angle above it
        above = a if a in ladder else min(b for b in ladder if b >= a)
        return sweep.is_tight(diam[a]) and sweep.dose_is_tight(diam[above])

    measure(angles)
    values = {a: virtual(a, a) for a in angles}
    bounds: dict[tuple[float, float], dict[str, RuleResult]] = {}

    def refine(todo: set[float]) -> None:
        # the dose bound of an added angle comes from the starting angle above it
        todo = todo | {min(b for b in ladder if b >= a) for a in todo if len(sweep.lit) > 1}
        todo = {a for a in todo if not tight(a)}
        if not todo:
            return
        measure(sorted(todo), refine=True)
        for a in todo:
            values[a] = virtual(a, a)
        for k in [k for k in bounds if k[0] in todo or k[1] in todo]:
            del bounds[k]

    # every angle starts with cheap bounds (block sums); branch and bound refines an
    # angle's maxima only where they could decide the result, and splits an interval
    # only where its bound is loose with refined maxima at both ends
    refine({max(angles, key=lambda a: binding_rule(values[a]).ratio)})
    splits = 0
    for _round in range(8 * _MAX_LEVELS):
        best = max((binding_rule(values[a]).ratio for a in angles if tight(a)), default=0.0)
        todo = {
            a for a in angles if not tight(a) and binding_rule(values[a]).ratio > (1 + tol) * best
        }
        new = []
        for a, b in zip(angles[:-1], angles[1:], strict=True):
            if (a, b) not in bounds:
                bounds[(a, b)] = virtual(b, a)
            if binding_rule(bounds[(a, b)]).ratio <= (1 + tol) * best:
                continue
            if not tight(b):
                todo.add(b)
            elif b / a > 1.0 + 1e-4 and splits < _MAX_LEVELS:
                new.append(math.sqrt(a * b))
        if todo:
            refine(todo)
            continue
        if not new:
            break
        splits += 1
        for a in new:
            diam[a] = retinal_image_diameter_um(a, eye)
        measure(new)
        for a in new:
            values[a] = virtual(a, a)
        angles = sorted(set(angles) | set(new))
        current = set(zip(angles[:-1], angles[1:], strict=True))
        bounds = {k: r for k, r in bounds.items() if k in current}
    for a, b in zip(angles[:-1], angles[1:], strict=True):
        if (a, b) not in bounds:
            bounds[(a, b)] = virtual(b, a)

    upper = {r: empty_rule(r, angles[0]) for r in RULES}
    for res in list(bounds.values()) + list(values.values()):
        upper = merge_rules(upper, res)
    found, angle_rows = _found_values(sweep, tl, angles, diam, per_map, dose_max, values)
    rules = {}
    for r in RULES:
        f = found[r]
        rules[r] = replace(f, ratio=max(upper[r].ratio, f.ratio), found_ratio=f.ratio)
    # the gap of the worst figure: the binding bound over the largest ratio found (the
    # other rules' bounds are refined less and may be looser)
    top_found = max(rules[r].found_ratio for r in RULES)
    gap = max(rules[r].ratio for r in RULES) / top_found if top_found > 0 else 1.0
    notes += [
        "The worst ratio is an upper bound over every sample centre and every acceptance angle "
        "from 1.5 to 100 mrad: between two evaluated angles the powers at the larger are "
        "compared with the limits at the smaller; angles are added until no interval's bound "
        f"exceeds the largest evaluated value by more than {tol:.0%} "
        f"({len(angles)} angles evaluated). The bound of each rule other than the binding "
        "one may be looser.",
        "Each map's largest disc power is bounded over every centre, also between samples "
        "(the map uniform within each sample): first by sums of blocks of samples that a "
        "disc centred in each block can reach (and by the peak irradiance times the disc "
        "area), with exact disc sums at the best blocks; where that bound could decide the "
        "result and is more than "
        f"{CENTRE_TOLERANCE:.1%} above the sum found, by smaller blocks and then by FFT "
        "disc-power maps of the disc grown by a sample diagonal (exact cell areas, a bound "
        "of their round-off; computed only over the centres whose block bound reaches the "
        "value found, in float64 where those are few), refined by branch and bound between "
        "samples; for the bound, "
        "the largest disc powers of all maps "
        "are taken to fall at one place, with every energy cut to the largest disc energy of "
        "the dose map.",
        f"The bound is {gap:.3g}x the largest ratio found exactly at one place.",
        "Rule 3 counts every pulse of the sequence (N = "
        + ", ".join(
            f"{n} grouped within {t * 1e6:g} µs" + ("" if one else ", touching pulses apart")
            for (t, one), n in counted.items()
        )
        + "); C_P = N^-0.25 without a floor (Directive 2006/25/EC, Table 2.6). Pulses that "
        "touch are taken both as one pulse and as several; the higher ratio is kept.",
    ]
    if sweep.loose:
        notes.append(
            f"On {sweep.loose} map(s) and disc size(s) the search between samples stopped at "
            "its budget; there the bound is the grown-disc bound (valid, up to a few per cent "
            "high at the smallest discs)."
        )
    if prot is not None:
        notes.append(
            "The protocol cap is evaluated per grid sample; the time average is over the "
            "whole sequence (first pulse start to last pulse end)."
        )
    work = {"disc_maps": sweep.disc_maps, "exact_sums": sweep.exact_sums, "angles": len(angles)}
    return replace(
        _result(
            lam,
            grid,
            items,
            all_pulses,
            total,
            dose,
            peak,
            rules,
            found,
            gap,
            prot,
            tuple(angle_rows),
            eye,
            subject,
            notes,
            angles,
        ),
        work=work,
    )


def _found_values(sweep, tl, angles, diam, per_map, dose_max, values):
    """Rules evaluated exactly at the candidate places of every angle."""
    grid = sweep.grid
    fixed = {peak_location(sweep.dose), peak_location(sweep.peak)}
    locs = []
    for a in angles:
        here = {(r, c) for (r, c, _) in per_map[a].values()} | {dose_max[a][:2]} | fixed
        locs.append(sorted(here))
    powers = sweep.powers_at([diam[a] for a in angles], locs)
    found = {r: empty_rule(r, angles[0]) for r in RULES}
    rows = []
    for j, a in enumerate(angles):
        for n, (row, col) in enumerate(locs[j]):
            out = tl.rules(lambda gi, j=j, n=n: powers[gi][j][n], a)
            x, y = grid.point_of(row, col)
            found = merge_rules(
                found, {r: replace(out[r], x_um=float(x), y_um=float(y)) for r in RULES}
            )
        b = binding_rule(values[a])
        top = max(m[2] for m in per_map[a].values())
        rows.append(AngleResult(a, diam[a], top * float(tl.scales.max()), b.ratio, b.rule))
    return found, rows


def _result(
    lam,
    grid,
    items,
    pulses,
    total,
    dose,
    peak,
    rules,
    found,
    gap,
    prot,
    angle_rows,
    eye,
    subject,
    notes,
    angles,
) -> ExposureAssessment:
    worst = binding_rule(rules)
    verdict_std = verdict_of(worst.ratio)
    overall = (
        "above" if (verdict_std == "above" or (prot and prot.verdict == "above")) else "within"
    )
    fr = max((found[r].ratio for r in RULES), default=0.0)
    return ExposureAssessment(
        wavelength_nm=lam,
        grid=grid,
        n_maps=len(items),
        n_pulses=len(pulses),
        duration_s=total,
        dose_map_mj_per_mm2=dose.astype(np.float32),
        peak_irradiance_map_mw_per_mm2=peak.astype(np.float32),
        rules=rules,
        worst=worst,
        worst_ratio=worst.ratio,
        found_ratio=fr,
        margin=margin_of(worst.ratio),
        binding_rule=worst.rule,
        verdict_standard=verdict_std,
        protocol=prot,
        verdict=overall,
        angles=angle_rows,
        basis=basis_text(eye, subject),
        notes=tuple(notes),
    )


def evaluate_map(
    irradiance_mw_per_mm2: Any,
    grid: RetinalGrid,
    wavelength_nm: float,
    duration_s: float,
    *,
    eye: EyeModel = HUMAN_EYE,
    protocol: ProtocolCap | None = None,
    alphas_mrad: Iterable[float] | None = None,
    subject: str | None = None,
) -> ExposureAssessment:
    """Extended-source evaluation of one predicted retina shown once for ``duration_s``.

    See :func:`assess_sequence`; the result's ``worst_ratio`` is an upper bound
    over every sample centre and acceptance angle.

    References
    ----------
    .. [1] ICNIRP (2013); Directive 2006/25/EC, Annex II.
    """
    t = validate.number("duration_s", duration_s, lo=0.0, lo_open=True)
    return assess_sequence(
        [Frame(irradiance_mw_per_mm2, (Pulse(0.0, t * 1e3),))],
        grid,
        wavelength_nm,
        eye=eye,
        protocol=protocol,
        alphas_mrad=alphas_mrad,
        subject=subject,
    )
