"""The stimulation threshold of an implant: a published or measured irradiance range.

Published thresholds of photovoltaic subretinal arrays are ranges, not one
number: they depend on the pulse duration, the retina (normal or
degenerate, in vitro or in vivo) and the pixel design. An implant therefore
carries a range ``(low, high)`` of peak retinal irradiance, mW/mm², with the
text of its source:

- an ON pixel whose photodiode gets less than ``high`` *may not stimulate*;
- an OFF pixel whose photodiode gets more than ``low`` *may stimulate*.

Each reading is the conservative one for its own question. An implant
without a range has no threshold: the caller must refuse any view that needs
one rather than guess.

Instead of a range an implant may carry a strength–duration curve
(:mod:`stimplan.implant.strength_duration`: rheobase and chronaxie); its
threshold is then one value, the curve's at the pulse width of the step,
and both readings use it. An implant has a range or a curve, not both.

References
----------
.. [1] K. Mathieson et al., "Photovoltaic retinal prosthesis with high pixel
   density", *Nat. Photonics* 6(6), 391-397 (2012), abstract: threshold peak
   irradiances 0.2 to 10 mW/mm² with 0.5-4 ms pulses, rat retina in vitro,
   70 µm bipolar pixels.
.. [2] T. W. Huang et al., "Vertical-junction photodiodes for smaller pixels
   in retinal prostheses", *J. Neural Eng.* 18(3), 036015 (2021),
   doi:10.1088/1741-2552/abe6b8, abstract: full-field threshold
   0.057 ± 0.029 mW/mm² with 10 ms pulses (RCS rats, VEP; monopolar
   vertical-junction pixels of 55-20 µm).
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

from .. import validate
from ..errors import ConfigError

__all__ = [
    "HUANG_2021",
    "MATHIESON_2012",
    "StimulationThreshold",
    "check_threshold",
    "stimulation_threshold",
]

#: The range of Mathieson et al. (2012) [1]_ and its source text.
MATHIESON_2012 = (
    (0.2, 10.0),
    "Mathieson et al., Nat. Photonics 6(6), 391-397 (2012), abstract: threshold peak "
    "irradiance 0.2-10 mW/mm² with 0.5-4 ms pulses, rat retina in vitro. The source's "
    "pixels differ: 70 µm bipolar pixels, not 55 µm",
)

#: The range of Huang et al. (2021) [2]_ (mean ± one SD) and its source text.
HUANG_2021 = (
    (0.028, 0.086),
    "Huang et al., J. Neural Eng. 18(3), 036015 (2021), abstract: full-field threshold "
    "0.057 ± 0.029 mW/mm² with 10 ms pulses, RCS rats, VEP, vertical-junction monopolar "
    "pixels of 55-20 µm (the range is mean ± one SD; it holds for 10 ms pulses)",
)


@dataclass(frozen=True, kw_only=True)
class StimulationThreshold:
    """A stimulation threshold range and where it comes from.

    Parameters
    ----------
    low_mw_per_mm2, high_mw_per_mm2 : float
        Ends of the range of peak retinal irradiance, mW/mm², ``low <= high``.
    source : str
        The publication (or "given by the user"), with its conditions.
    pulse_ms : float, optional
        The pulse width a strength–duration curve was read at (None for a range).
    model : {"range", "weiss", "lapicque"}
        A published range, or the law of the curve.
    """

    low_mw_per_mm2: float
    high_mw_per_mm2: float
    source: str
    pulse_ms: float | None = None
    model: str = "range"

    def as_pair(self) -> list[float]:
        """``[low, high]``, mW/mm²."""
        return [self.low_mw_per_mm2, self.high_mw_per_mm2]


def check_threshold(
    pair: Any, source: Any, *, has_curve: bool = False
) -> tuple[tuple[float, float] | None, str | None]:
    """Validate an implant's ``threshold_mw_per_mm2`` and ``threshold_source``.

    Parameters
    ----------
    pair : sequence of two numbers, or None
        ``[low, high]``, mW/mm², each in the range of
        ``stimulation_threshold_mw_per_mm2`` (:mod:`stimplan.ranges`), ``low <= high``.
    source : str or None
        Where the range (or the strength–duration curve) comes from.
    has_curve : bool
        Whether the implant has a strength–duration curve (then no range, and
        the source is the curve's).

    Returns
    -------
    tuple
        The pair as a tuple of floats (or None) and the source.
    """
    field = "implant.threshold_mw_per_mm2"
    if source is not None and not isinstance(source, str):
        raise ConfigError("implant.threshold_source", source, "a string")
    if pair is None:
        if source is not None and not has_curve:
            raise ConfigError(
                "implant.threshold_source",
                source,
                "only with threshold_mw_per_mm2 or threshold_rheobase_mw_per_mm2",
            )
        return None, source
    if has_curve:
        raise ConfigError(
            field,
            pair,
            "not with a strength–duration curve (threshold_rheobase_mw_per_mm2)",
            "give a range or a curve, not both",
        )
    if isinstance(pair, (int, float)) and not isinstance(pair, bool):
        pair = (pair, pair)  # one measured value: a range of zero width
    if not isinstance(pair, (list, tuple)) or len(pair) != 2:
        raise ConfigError(field, pair, "a pair [low, high] of irradiances (mW/mm²)")
    q = "stimulation_threshold_mw_per_mm2"
    lo = validate.physical(f"{field}[0]", pair[0], q)
    hi = validate.physical(f"{field}[1]", pair[1], q)
    if lo > hi:
        raise ConfigError(field, list(pair), "low <= high (mW/mm²)")
    return (lo, hi), source


def stimulation_threshold(implant: Any, *, pulse_ms: float | None = None) -> StimulationThreshold:
    """The implant's threshold, or a :class:`ConfigError` when it has none.

    Parameters
    ----------
    implant : Implant
    pulse_ms : float, optional
        The pulse width of the step, ms: needed when the implant's threshold is
        a strength–duration curve, not used with a range.

    Returns
    -------
    StimulationThreshold
        The range, or the curve's value at ``pulse_ms`` (``low == high``).

    Raises
    ------
    ConfigError
        Naming ``implant.threshold_mw_per_mm2`` when no threshold is known (no
        published one for this preset, nor one given by the user); naming
        ``pulse_ms`` when a curve needs one, or it lies outside the curve's pulse
        widths.

    References
    ----------
    .. [1] Mathieson et al. (2012); Huang et al. (2021): see the module notes.
    """
    curve = implant.strength_duration
    if curve is not None:
        if pulse_ms is None:
            raise ConfigError(
                "pulse_ms",
                None,
                "the pulse width of the step, ms",
                f"implant {implant.name!r} has a strength–duration threshold",
            )
        value = curve.threshold_mw_per_mm2(pulse_ms)
        return StimulationThreshold(
            low_mw_per_mm2=value,
            high_mw_per_mm2=value,
            source=f"{curve.describe()}, at {float(pulse_ms):g} ms pulses",
            pulse_ms=float(pulse_ms),
            model=curve.law,
        )
    pair = implant.threshold_mw_per_mm2
    if pair is None:
        raise ConfigError(
            "implant.threshold_mw_per_mm2",
            None,
            "a measured range [low, high] in mW/mm², or a strength–duration curve",
            f"no sourced stimulation threshold for implant {implant.name!r}: give "
            "threshold_mw_per_mm2 = [low, high], or threshold_rheobase_mw_per_mm2 and "
            "threshold_chronaxie_ms (and threshold_source) under [implant]",
        )
    source = implant.threshold_source or "given by the user ([implant] threshold_mw_per_mm2)"
    return StimulationThreshold(low_mw_per_mm2=pair[0], high_mw_per_mm2=pair[1], source=source)
