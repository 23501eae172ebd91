"""Pulse timelines and the three rules for repeated exposure.

At one retinal location and one acceptance angle, a timeline of pulses (each
with the power within the acceptance disc) is compared with the limits of
:func:`stimplan.exposure.mpe.thermal_limit_j_per_m2` by the three rules of
Directive 2006/25/EC, Annex II, Table 2.6 (the same rules as ICNIRP 2013):

1. no single pulse may exceed the single-pulse limit for its duration;
2. no group of pulses delivered in a time T may exceed the limit for T (every
   window from a pulse start to a later pulse end, the whole timeline among them);
3. no single pulse may exceed the single-pulse limit times ``C_P = N**-0.25``.

For rule 3 every pulse of the assessed sequence is counted, lit at this place
or not, and pulses delivered within the grouping time count as one. The two
editions group differently (18 us or 5 us below 1050 nm), and neither grouping
is always the stricter, so rule 3 is evaluated with both and the higher ratio
is kept.

References
----------
.. [1] Directive 2006/25/EC, Annex II, Table 2.6.
.. [2] ICNIRP, Health Phys. 105, 271-295 (2013), repeated exposure.
"""

from __future__ import annotations

import math
from collections.abc import Callable, Iterable, Sequence
from dataclasses import dataclass, field
from typing import Any

import numpy as np

from .. import validate
from ..cautions import CAUTION_SHORT, CAUTIONS, EDITION
from ..errors import ConfigError
from .factors import DURATION_MAX_S, c_p, check_wavelength, grouping_times_s
from .mpe import thermal_limit_j_per_m2
from .retina import HUMAN_EYE, EyeModel, basis_text, check_eye, retinal_energy_factor_mj

__all__ = [
    "RULES",
    "RULE_LABELS",
    "Pulse",
    "as_pulses",
    "periodic_pulses",
    "RuleResult",
    "empty_rule",
    "count_pulses",
    "counted_pulses",
    "timeline_rules",
    "merge_rules",
    "binding_rule",
    "timeline_arrays",
    "TrainAssessment",
    "evaluate_train",
]

#: The three rules for repeated exposure, in the order they are reported.
RULES = ("single_pulse", "average_power", "repeated_pulse")
RULE_LABELS = {
    "single_pulse": "rule 1, single pulse",
    "average_power": "rule 2, average over any group of pulses",
    "repeated_pulse": "rule 3, repeated pulses (C_P = N^-0.25)",
}

# Windows of rule 2: every window for trains up to this many pulses.
_EXACT_WINDOW_MAX = 2000
_WINDOW_EXACT_SPAN = 512
_WINDOW_STEP = 1.02
_TIME_TOL_S = 1e-9


@dataclass(frozen=True)
class Pulse:
    """One light pulse of a frame.

    Parameters
    ----------
    start_ms : float
        Start time from the beginning of the sequence, ms, >= 0.
    duration_ms : float
        Pulse width, ms, > 0.
    scale : float
        Multiplies the frame's irradiance (1 = the power the map was computed
        at), >= 0.
    """

    start_ms: float
    duration_ms: float
    scale: float = 1.0

    def __post_init__(self) -> None:
        object.__setattr__(self, "start_ms", validate.number("start_ms", self.start_ms, lo=0.0))
        object.__setattr__(
            self,
            "duration_ms",
            validate.number("duration_ms", self.duration_ms, lo=0.0, lo_open=True),
        )
        object.__setattr__(self, "scale", validate.number("scale", self.scale, lo=0.0))

    @property
    def end_ms(self) -> float:
        return self.start_ms + self.duration_ms


def as_pulses(pulses: Any, field: str = "pulses") -> tuple[Pulse, ...]:
    if isinstance(pulses, Pulse):
        pulses = [pulses]
    try:
        items = list(pulses)
    except TypeError:
        raise ConfigError(field, pulses, "a list of Pulse(start_ms, duration_ms, scale)") from None
    out = []
    for k, p in enumerate(items):
        if isinstance(p, Pulse):
            out.append(p)
            continue
        try:
            parts = tuple(p)
        except TypeError:
            raise ConfigError(
                f"{field}[{k}]", p, "a Pulse or (start_ms, duration_ms[, scale])"
            ) from None
        if len(parts) not in (2, 3):
            raise ConfigError(f"{field}[{k}]", p, "a Pulse or (start_ms, duration_ms[, scale])")
        names = ("start_ms", "duration_ms", "scale")
        try:
            out.append(Pulse(*parts))
        except ConfigError as exc:
            if exc.field in names:
                raise ConfigError(f"{field}[{k}].{exc.field}", exc.value, exc.allowed) from None
            raise
    return tuple(out)


def periodic_pulses(
    pulse_ms: float,
    *,
    period_ms: float | None = None,
    frequency_hz: float | None = None,
    count: int | None = None,
    duration_ms: float | None = None,
    start_ms: float = 0.0,
    scale: float = 1.0,
) -> list[Pulse]:
    """A regular train of pulses.

    Parameters
    ----------
    pulse_ms : float
        Pulse width, ms; at most the period.
    period_ms, frequency_hz : float
        Give one of them.
    count, duration_ms : int or float
        Give one: the number of pulses, or the train length (every pulse that
        ends within ``duration_ms`` of the first start is kept).
    start_ms : float
        Start of the first pulse.
    scale : float
        Scale of every pulse.

    Returns
    -------
    list of Pulse

    References
    ----------
    .. [1] ICNIRP (2013): repeated-pulse rules are applied to the actual pulse timeline.
    """
    w = validate.number("pulse_ms", pulse_ms, lo=0.0, lo_open=True)
    if (period_ms is None) == (frequency_hz is None):
        raise ConfigError("period_ms", period_ms, "exactly one of period_ms and frequency_hz")
    if period_ms is not None:
        period = validate.number("period_ms", period_ms, lo=0.0, lo_open=True)
    else:
        period = 1000.0 / validate.number("frequency_hz", frequency_hz, lo=0.0, lo_open=True)
    if w > period * (1 + 1e-12):
        raise ConfigError(
            "pulse_ms",
            pulse_ms,
            f"<= the period ({period:g} ms)",
            "a pulse cannot be longer than its period",
        )
    if (count is None) == (duration_ms is None):
        raise ConfigError("count", count, "exactly one of count and duration_ms")
    if count is not None:
        n = validate.integer("count", count, lo=1)
    else:
        total = validate.number("duration_ms", duration_ms, lo=w)
        n = int(math.floor((total - w) / period + 1e-9)) + 1
    t0 = validate.number("start_ms", start_ms, lo=0.0)
    s = validate.number("scale", scale, lo=0.0)
    return [Pulse(t0 + k * period, w, s) for k in range(n)]


@dataclass(frozen=True)
class RuleResult:
    """The worst ratio of exposure to limit found for one rule.

    Attributes
    ----------
    rule : str
        One of :data:`RULES`.
    ratio : float
        Exposure divided by the limit (> 1 is above the limit). In a sequence
        assessment it is an upper bound over every centre and acceptance angle.
    alpha_mrad : float
        Acceptance angle of the place reported.
    exposure_mj, limit_mj : float
        Retinal energy within the acceptance disc and the limit it is compared
        with (``limit_mj`` includes C_P for rule 3), at the place reported.
    window_start_ms, window_duration_ms : float
        The pulse, group of pulses or window concerned.
    n_pulses : int
        Pulses in that window (rule 2) or N used for C_P (rule 3).
    c_p : float
        C_P (rule 3; 1 otherwise).
    x_um, y_um : float or None
        Retinal location (sequence assessments only).
    found_ratio : float or None
        The exact ratio at the place reported, where ``ratio`` is a bound.
    """

    rule: str
    ratio: float
    alpha_mrad: float
    exposure_mj: float
    limit_mj: float
    window_start_ms: float
    window_duration_ms: float
    n_pulses: int = 1
    c_p: float = 1.0
    x_um: float | None = None
    y_um: float | None = None
    found_ratio: float | None = None
    hazard: str = "thermal"
    edition: str = EDITION

    @property
    def label(self) -> str:
        return RULE_LABELS.get(self.rule, self.rule)

    def summary(self) -> str:
        """The figure with the edition and :data:`CAUTIONS`, for standalone output."""
        return f"{self.describe()} [{self.edition}]\n{CAUTIONS}"

    def describe(self) -> str:
        """One line, without the caution (a part of a summary)."""
        text = f"{self.label}: {self.ratio:.3g} of the limit"
        if self.found_ratio is not None and self.found_ratio < self.ratio * (1 - 1e-9):
            text += f" (upper bound; {self.found_ratio:.3g} found at the place below)"
        text += f" (alpha = {self.alpha_mrad:.3g} mrad, {self.window_duration_ms:.4g} ms from "
        text += f"{self.window_start_ms:.4g} ms"
        if self.rule == "average_power":
            text += f", {self.n_pulses} pulse{'s' if self.n_pulses != 1 else ''}"
        if self.rule == "repeated_pulse":
            text += f", N = {self.n_pulses}, C_P = {self.c_p:.3g}"
        if self.x_um is not None:
            text += f", at x = {self.x_um:.1f} µm, y = {self.y_um:.1f} µm"
        return text + ")"


def empty_rule(rule: str, alpha: float) -> RuleResult:
    """A rule with nothing lit."""
    return RuleResult(rule, 0.0, alpha, 0.0, math.inf, 0.0, 0.0, 0, 1.0)


def _groups(s: np.ndarray, d: np.ndarray, q: np.ndarray, t_i: float, touching: bool = True):
    """Group sorted pulses: those starting within ``t_i`` of a group's start, or
    touching it (if ``touching``), count as one. Returns start, end, energy,
    duration (the span) and count."""
    e = s + d
    n = len(s)
    gs, ge, gq, gn = [], [], [], []
    k = 0
    while k < n:
        start, end, energy, count = s[k], e[k], q[k], 1
        k += 1
        while k < n and (s[k] < start + t_i or (touching and s[k] <= end + _TIME_TOL_S)):
            end = max(end, e[k])
            energy += q[k]
            count += 1
            k += 1
        gs.append(start)
        ge.append(end)
        gq.append(energy)
        gn.append(count)
    gs, ge = np.asarray(gs, dtype=np.float64), np.asarray(ge, dtype=np.float64)
    return gs, ge, np.asarray(gq, dtype=np.float64), ge - gs, np.asarray(gn)


def count_pulses(
    starts_s: np.ndarray, durs_s: np.ndarray, t_i: float, *, touching: bool = True
) -> int:
    """Number of pulses of a timeline after grouping within ``t_i`` (every pulse counts);
    pulses that touch are one unless ``touching`` is False."""
    if len(starts_s) == 0:
        return 0
    order = np.argsort(starts_s, kind="stable")
    s, d = starts_s[order], durs_s[order]
    return len(_groups(s, d, np.zeros(len(s)), t_i, touching)[0])


def counted_pulses(
    starts_s: np.ndarray, durs_s: np.ndarray, wavelength_nm: float
) -> dict[tuple[float, bool], int]:
    """N of rule 3 for each grouping time and each reading of touching pulses.

    Keys are ``(t_i, touching)``: pulses that touch are one pulse
    (``touching=True``) or each its own (``False``). The standards do not say
    which; :func:`timeline_rules` evaluates both and keeps the higher ratio.
    """
    return {
        (t, m): count_pulses(starts_s, durs_s, t, touching=m)
        for t in grouping_times_s(wavelength_nm)
        for m in (True, False)
    }


def _share_sums(labels: np.ndarray, q: np.ndarray, counts: np.ndarray) -> np.ndarray:
    """Cumulative shares, per map (row), of each map's whole energy over groups of pulses.

    ``labels`` names the map each sorted pulse shows, ``q`` its energy and
    ``counts`` the pulses of each consecutive group. Row ``k`` at column ``g``
    is the share of map ``k``'s energy in groups ``0 .. g - 1``.
    """
    _, lab = np.unique(labels, return_inverse=True)
    total = np.bincount(lab, weights=q)
    gidx = np.repeat(np.arange(len(counts)), counts)
    z = np.zeros((int(lab.max()) + 1, len(counts) + 1))
    np.add.at(z, (lab, gidx + 1), q / total[lab])
    return np.cumsum(z, axis=1)


def _share_cap(cap: float, zc: np.ndarray | None, i, j) -> np.ndarray | float:
    """Energy cap of the windows of groups ``i .. j``: ``cap`` times the largest share
    of one map's energy among them (``cap`` alone without shares)."""
    if zc is None:
        return cap
    return cap * np.max(zc[:, np.asarray(j) + 1] - zc[:, np.asarray(i)], axis=0)


def _window_offsets(n: int) -> np.ndarray:
    k = int(math.ceil(math.log(max(n, 2) / _WINDOW_EXACT_SPAN) / math.log(_WINDOW_STEP))) + 1
    geo = np.round(_WINDOW_EXACT_SPAN * _WINDOW_STEP ** np.arange(k + 1)).astype(np.int64)
    off = np.concatenate([np.arange(_WINDOW_EXACT_SPAN), geo, [n - 1]])
    return np.unique(off[off <= n - 1])


def _worst_window(
    s: np.ndarray,
    e: np.ndarray,
    q: np.ndarray,
    dmin: np.ndarray,
    limit_mj: Callable[[np.ndarray], np.ndarray],
    cap: float = math.inf,
    shares: np.ndarray | None = None,
) -> tuple[float, int, int]:
    """Worst energy/limit over windows [start_i, end_j] of sorted pulses (rule 2).

    Every window from a pulse start to a later pulse end is evaluated for up
    to ``_EXACT_WINDOW_MAX`` pulses; longer trains take every window up to
    ``_WINDOW_EXACT_SPAN`` pulses long and a geometric set of longer ones,
    and bound each skipped window from above by (energy up to the next
    evaluated end) / (limit at the previous evaluated end), so that the
    result can only err high. Cumulative sums give each window's energy; every
    energy is cut to ``cap``, an upper bound on any energy at this place, times
    the largest share of one map's energy in the window if ``shares``
    (:func:`_share_sums`) is given.
    """
    n = len(s)
    csum = np.concatenate(([0.0], np.cumsum(q)))
    emax = np.maximum.accumulate(e)
    offsets = np.arange(n) if n <= _EXACT_WINDOW_MAX else _window_offsets(n)
    sampled = n > _EXACT_WINDOW_MAX
    best, bi, bj = -1.0, 0, 0
    maps = 1 if shares is None else shares.shape[0]
    rows = max(1, 2_000_000 // max(1, len(offsets) * maps))
    for i0 in range(0, n, rows):
        i = np.arange(i0, min(n, i0 + rows))[:, None]
        j = i + offsets[None, :]
        valid = j < n
        jc = np.minimum(j, n - 1)
        energy = np.minimum(csum[jc + 1] - csum[i], _share_cap(cap, shares, i, jc))
        dur = np.maximum(emax[jc] - s[i], dmin[i])
        with np.errstate(divide="ignore", invalid="ignore"):
            r = np.where(valid, energy / limit_mj(dur), 0.0)
        r = np.nan_to_num(r, nan=0.0, posinf=np.inf)
        if sampled:
            # the window to the last pulse, exactly
            last_e = np.minimum(csum[n] - csum[i[:, 0]], _share_cap(cap, shares, i[:, 0], n - 1))
            last_d = np.maximum(emax[n - 1] - s[i[:, 0]], dmin[i[:, 0]])
            with np.errstate(divide="ignore", invalid="ignore"):
                r_last = np.nan_to_num(last_e / limit_mj(last_d), nan=0.0)
            # upper bounds for the skipped windows between evaluated ends
            lo = i + offsets[None, :-1] + 1
            hi = np.minimum(i + offsets[None, 1:] - 1, n - 1)
            gap = (lo <= hi) & (lo <= n - 1)
            loc = np.minimum(lo, n - 1)
            hic = np.maximum(np.minimum(hi, n - 1), 0)
            b_e = np.minimum(csum[hic + 1] - csum[i], _share_cap(cap, shares, i, hic))
            b_d = np.maximum(emax[loc] - s[i], dmin[i])
            with np.errstate(divide="ignore", invalid="ignore"):
                b = np.where(gap, np.nan_to_num(b_e / limit_mj(b_d), nan=0.0), 0.0)
        flat = int(np.argmax(r))
        val = float(r.flat[flat])
        if val > best:
            best = val
            bi = i0 + flat // r.shape[1]
            bj = min(bi + int(offsets[flat % r.shape[1]]), n - 1)
        if sampled:
            k = int(np.argmax(r_last))
            if float(r_last[k]) > best:
                best, bi, bj = float(r_last[k]), i0 + k, n - 1
            if b.size:
                flat = int(np.argmax(b))
                val = float(b.flat[flat])
                if val > best:
                    row = flat // b.shape[1]
                    best = val
                    bi = i0 + row
                    bj = int(hic[row, flat % b.shape[1]])
    return max(best, 0.0), bi, bj


def timeline_rules(
    starts_s: np.ndarray,
    durs_s: np.ndarray,
    powers_mw: np.ndarray,
    wavelength_nm: float,
    limit_alpha_mrad: float,
    eye: EyeModel,
    n_counted: dict[tuple[float, bool], int],
    *,
    energy_cap_mj: float = math.inf,
    map_of_pulse: np.ndarray | None = None,
    report_alpha_mrad: float | None = None,
) -> dict[str, RuleResult]:
    """Rules 1-3 for one timeline of disc powers.

    Parameters
    ----------
    starts_s, durs_s, powers_mw : ndarray
        The pulses and the power within the acceptance disc during each.
    wavelength_nm : float
        700-1200 nm (checked by the caller).
    limit_alpha_mrad : float
        The acceptance angle whose limits are used.
    eye : EyeModel
        Its transmission turns corneal limits into retinal energies.
    n_counted : dict of (float, bool) to int
        For each grouping time of :func:`grouping_times_s` and each reading of
        touching pulses, the number of pulses of the whole sequence
        (:func:`counted_pulses`).
    energy_cap_mj : float
        An upper bound on the energy of any group of pulses here (the largest
        disc energy of the dose map); energies above it are cut to it.
    map_of_pulse : ndarray of int, optional
        Which map each pulse shows, when ``energy_cap_mj`` is the largest disc
        energy of the dose map of several maps. A group of pulses then holds at
        most ``energy_cap_mj`` times the largest share of one map's energy
        among its pulses: at any place its energy is ``sum_k c_k P_k`` with
        ``c_k <= share * w_k``, and the dose is ``sum_k w_k P_k`` (all terms
        non-negative). This keeps the bound tight where the largest disc powers
        of different maps are placed together.
    report_alpha_mrad : float, optional
        The angle named in the results (default ``limit_alpha_mrad``).
    """
    alpha = limit_alpha_mrad if report_alpha_mrad is None else report_alpha_mrad
    out = {r: empty_rule(r, alpha) for r in RULES}
    keep = powers_mw > 0
    if not np.any(keep):
        return out
    order = np.argsort(starts_s[keep], kind="stable")
    s = starts_s[keep][order]
    d = durs_s[keep][order]
    q = powers_mw[keep][order] * d  # mJ
    labels = None
    if map_of_pulse is not None and math.isfinite(energy_cap_mj):
        labels = np.asarray(map_of_pulse)[keep][order]
        if np.unique(labels).size < 2:
            labels = None  # one map: the dose map is a multiple of it
    factor = retinal_energy_factor_mj(eye)
    lam = wavelength_nm

    def limit(t: np.ndarray) -> np.ndarray:
        return factor * np.asarray(
            thermal_limit_j_per_m2(lam, np.maximum(t, 1e-9), limit_alpha_mrad)
        )

    cap = float(energy_cap_mj)

    # Pulses that touch are one exposure, and each of them is a pulse too: a bright
    # pulse must not hide in a longer, dimmer one it touches. Rule 2 takes every window
    # of the single pulses (those include every window of the merged ones); rules 1
    # and 3 take both readings and keep the higher ratio.
    ms, me, mq, md, mn = _groups(s, d, q, 0.0, touching=False)
    zc = None if labels is None else _share_sums(labels, q, mn)
    ratio, i, j = _worst_window(ms, me, mq, md, limit, cap, zc)
    if ratio > 0:
        dur = max(float(np.max(me[i : j + 1]) - ms[i]), float(md[i]))
        energy = min(float(mq[i : j + 1].sum()), float(_share_cap(cap, zc, i, j)))
        out["average_power"] = RuleResult(
            "average_power",
            ratio,
            alpha,
            energy,
            float(limit(np.asarray(dur))),
            float(ms[i] * 1e3),
            dur * 1e3,
            int(mn[i : j + 1].sum()),
            1.0,
        )
    # Rule 1: each pulse, alone (the groups of rule 2) and merged with those it touches.
    ts, _te, tq, td, tn = _groups(s, d, q, 0.0, touching=True)
    tz = None if labels is None else _share_sums(labels, q, tn)
    for gs, gq, gd, gz in ((ms, mq, md, zc), (ts, tq, td, tz)):
        idx = np.arange(len(gq))
        gqc = np.minimum(gq, _share_cap(cap, gz, idx, idx))
        lim1 = limit(gd)
        r1 = gqc / lim1
        k = int(np.argmax(r1))
        if r1[k] > out["single_pulse"].ratio:
            out["single_pulse"] = RuleResult(
                "single_pulse",
                float(r1[k]),
                alpha,
                float(gqc[k]),
                float(lim1[k]),
                float(gs[k] * 1e3),
                float(gd[k] * 1e3),
                1,
                1.0,
            )
    # Rule 3: pulses grouped by each edition's time, N from the whole sequence.
    best = None
    for t_i, touching in [(t, m) for t in grouping_times_s(lam) for m in (True, False)]:
        gs, _ge, gq, gd, gn = _groups(s, d, q, t_i, touching)
        gz = None if labels is None else _share_sums(labels, q, gn)
        idx = np.arange(len(gq))
        gq = np.minimum(gq, _share_cap(cap, gz, idx, idx))
        n = max(1, int(n_counted.get((t_i, touching), len(gs))))
        cp = float(c_p(n))
        lim = limit(gd) * cp
        r3 = gq / lim
        k = int(np.argmax(r3))
        if r3[k] > 0 and (best is None or r3[k] > best.ratio):
            best = RuleResult(
                "repeated_pulse",
                float(r3[k]),
                alpha,
                float(gq[k]),
                float(lim[k]),
                float(gs[k] * 1e3),
                float(gd[k] * 1e3),
                n,
                cp,
            )
    if best is not None:
        out["repeated_pulse"] = best
    return out


def merge_rules(a: dict[str, RuleResult], b: dict[str, RuleResult]) -> dict[str, RuleResult]:
    """Per rule, the result with the higher ratio."""
    return {r: (b[r] if b[r].ratio > a[r].ratio else a[r]) for r in RULES}


def binding_rule(rules: dict[str, RuleResult]) -> RuleResult:
    """The rule with the highest ratio (the first of equal ones)."""
    best = rules[RULES[0]]
    for r in RULES[1:]:
        if rules[r].ratio > best.ratio * (1 + 1e-9):
            best = rules[r]
    return best


def timeline_arrays(pulses: Sequence[Pulse], field: str) -> tuple[np.ndarray, np.ndarray]:
    """Starts and durations in seconds; a timeline longer than the tables is refused."""
    starts = np.array([p.start_ms for p in pulses], dtype=np.float64) * 1e-3
    durs = np.array([p.duration_ms for p in pulses], dtype=np.float64) * 1e-3
    if len(pulses):
        span = float(np.max(starts + durs) - np.min(starts))
        if span > DURATION_MAX_S:
            raise ConfigError(
                field,
                f"{span:g} s",
                f"a timeline of at most {DURATION_MAX_S:g} s",
                "the tables end at 3e4 s",
            )
        if float(durs.min()) < 1e-9:
            raise ConfigError(
                f"{field}.duration_ms",
                float(durs.min()) * 1e3,
                ">= 1e-6 ms (1 ns)",
                "pulses under 1 ns are not supported: the published editions disagree there",
            )
    return starts, durs


def verdict_of(ratio: float) -> str:
    """``"above"`` for a ratio over 1, else ``"within"``."""
    return "above" if ratio > 1.0 else "within"


def margin_of(ratio: float) -> float:
    """The factor by which the exposure could grow before the limit (inf if unlit)."""
    return math.inf if ratio <= 0 else 1.0 / ratio


@dataclass(frozen=True)
class TrainAssessment:
    """The three rules applied to a pulse train at one location and one acceptance angle."""

    wavelength_nm: float
    alpha_mrad: float
    peak_retinal_power_mw: float
    n_pulses: int
    duration_s: float
    rules: dict[str, RuleResult]
    worst: RuleResult
    worst_ratio: float
    margin: float
    binding_rule: str
    verdict: str
    basis: str
    notes: tuple[str, ...]
    edition: str = EDITION
    caution: str = field(default=CAUTION_SHORT, repr=False)

    def ratio(self, rule: str) -> float:
        return self.rules[rule].ratio

    def summary(self) -> str:
        lines = [
            f"Pulse train at {self.wavelength_nm:g} nm, alpha = {self.alpha_mrad:g} mrad, "
            f"{self.n_pulses} pulses over {self.duration_s:.4g} s, peak retinal power "
            f"{self.peak_retinal_power_mw:.4g} mW ({self.edition})",
        ]
        lines += ["  " + self.rules[r].describe() for r in RULES]
        lines.append(
            f"  worst: {self.worst_ratio:.3g} of the limit ({RULE_LABELS[self.binding_rule]}), "
            f"margin {self.margin:.3g}x, {self.verdict} the limit"
        )
        lines.append("  Basis: " + self.basis)
        lines += ["  Note: " + n for n in self.notes]
        lines.append(CAUTIONS)
        return "\n".join(lines)


def evaluate_train(
    pulses: Iterable[Pulse],
    wavelength_nm: float,
    alpha_mrad: float,
    peak_retinal_power_mw: float,
    *,
    eye: EyeModel = HUMAN_EYE,
    subject: str | None = None,
) -> TrainAssessment:
    """Rules 1-3 for a timeline of pulses at one retinal location.

    Parameters
    ----------
    pulses : iterable of Pulse
        The timeline; ``scale`` multiplies the peak power. Every pulse counts
        in N, however dim.
    wavelength_nm : float
        700-1200 nm.
    alpha_mrad : float
        Acceptance angle; the power is that within a retinal disc of diameter
        ``alpha * f`` (at least alpha_min).
    peak_retinal_power_mw : float
        Retinal power within that disc during a pulse of scale 1, mW, > 0.
    eye : EyeModel
        Reference eye; its transmission should be the one the power was
        computed with (it cancels).
    subject : str, optional
        The eye the stimulus is for, named in the basis text.

    Returns
    -------
    TrainAssessment

    References
    ----------
    .. [1] Directive 2006/25/EC, Annex II, Table 2.6 (the three rules, C_P = N^-0.25).
    .. [2] ICNIRP (2013), repeated exposure.
    """
    lam = check_wavelength(wavelength_nm)
    a = validate.number("alpha_mrad", alpha_mrad, lo=0.0)
    power = validate.number("peak_retinal_power_mw", peak_retinal_power_mw, lo=0.0, lo_open=True)
    eye = check_eye(eye)
    items = as_pulses(pulses)
    if not items:
        raise ConfigError("pulses", [], "at least one pulse")
    starts, durs = timeline_arrays(items, "pulses")
    scales = np.array([p.scale for p in items], dtype=np.float64)
    total = float(np.max(starts + durs) - np.min(starts))
    counted = counted_pulses(starts, durs, lam)
    rules = timeline_rules(
        starts, durs, power * scales, lam, max(a, 1.5), eye, counted, report_alpha_mrad=a
    )
    worst = binding_rule(rules)
    notes = (
        "Rule 2 windows run from each pulse start to each later pulse end "
        f"(every window up to {_EXACT_WINDOW_MAX} pulses; longer trains bounded from above).",
        "Rule 3 counts every pulse of the timeline, grouped within "
        + " or ".join(f"{t * 1e6:g} µs" for t in grouping_times_s(lam))
        + " (both editions' grouping times), pulses that touch taken as one and as "
        "several; the highest ratio is kept.",
    )
    return TrainAssessment(
        wavelength_nm=lam,
        alpha_mrad=a,
        peak_retinal_power_mw=power,
        n_pulses=len(items),
        duration_s=total,
        rules=rules,
        worst=worst,
        worst_ratio=worst.ratio,
        margin=margin_of(worst.ratio),
        binding_rule=worst.rule,
        verdict=verdict_of(worst.ratio),
        basis=basis_text(eye, None if subject is None else subject),
        notes=notes,
    )
