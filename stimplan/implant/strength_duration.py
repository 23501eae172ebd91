"""The strength–duration law of a stimulation threshold: irradiance against pulse width.

A pulse of light of width ``t`` stimulates when its irradiance reaches the
threshold ``I_th(t)``. Two classical laws, each with a rheobase ``I_rh``
(the threshold of an endless pulse) and a chronaxie ``t_ch`` (the pulse width
at which the threshold is twice the rheobase):

- Weiss (linear charge): ``I_th(t) = I_rh (1 + t_ch / t)``, so the charge
  ``I_th t = I_rh (t + t_ch)`` grows linearly with ``t`` [1]_;
- Lapicque (exponential, a leaky membrane of time constant ``τ``):
  ``I_th(t) = I_rh / (1 - exp(-t / τ))`` with ``t_ch = τ ln 2``, i.e.
  ``I_th(t) = I_rh / (1 - 2^(-t / t_ch))`` [2]_ [3]_.

With a photovoltaic pixel the current is proportional to the irradiance on its
photodiode (:mod:`stimplan.implant.photodiode`), so a law written for current
holds for irradiance with the same chronaxie. No preset carries a curve: no
publication we could read gives the rheobase and chronaxie of a photovoltaic
array in irradiance, nor thresholds at several pulse widths to fit. The user
gives them with their source.

A curve may name the pulse widths it was measured over
(``pulse_range_ms``); a pulse outside them is refused, not extrapolated.

References
----------
.. [1] G. Weiss, "Sur la possibilité de rendre comparables entre eux les
   appareils servant à l'excitation électrique", *Arch. Ital. Biol.* 35,
   413-446 (1901).
.. [2] L. Lapicque, "Recherches quantitatives sur l'excitation électrique des
   nerfs traitée comme une polarisation", *J. Physiol. Pathol. Gén.* 9,
   620-635 (1907).
.. [3] L. A. Geddes, "Accuracy limitations of chronaxie values", *IEEE
   Trans. Biomed. Eng.* 51(1), 176-181 (2004).
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Any

import numpy as np

from .. import validate
from ..errors import ConfigError

__all__ = [
    "LAWS",
    "StrengthDuration",
    "weiss_threshold",
    "lapicque_threshold",
    "check_pulse_range",
]

#: The strength–duration laws by name.
LAWS = ("weiss", "lapicque")


def weiss_threshold(pulse_ms: Any, *, rheobase: float, chronaxie_ms: float) -> Any:
    """Weiss's law, ``rheobase × (1 + chronaxie / pulse)``.

    Parameters
    ----------
    pulse_ms : float or ndarray
        Pulse width, ms, > 0.
    rheobase : float
        Threshold of an endless pulse (any unit; the result has the same).
    chronaxie_ms : float
        Pulse width at which the threshold is twice the rheobase, ms.

    Returns
    -------
    float or ndarray

    References
    ----------
    .. [1] Weiss (1901), see the module notes.
    """
    t = np.asarray(pulse_ms, dtype=np.float64)
    out = rheobase * (1.0 + chronaxie_ms / t)
    return float(out) if out.ndim == 0 else out


def lapicque_threshold(pulse_ms: Any, *, rheobase: float, chronaxie_ms: float) -> Any:
    """Lapicque's law, ``rheobase / (1 - 2^(-pulse / chronaxie))``.

    The membrane time constant is ``chronaxie / ln 2``.

    Parameters
    ----------
    pulse_ms : float or ndarray
        Pulse width, ms, > 0.
    rheobase : float
    chronaxie_ms : float

    Returns
    -------
    float or ndarray

    References
    ----------
    .. [1] Lapicque (1907); Geddes (2004): see the module notes.
    """
    t = np.asarray(pulse_ms, dtype=np.float64)
    out = rheobase / -np.expm1(-math.log(2.0) * t / chronaxie_ms)
    return float(out) if out.ndim == 0 else out


def check_pulse_range(field: str, pair: Any) -> tuple[float, float] | None:
    """Validate a ``[shortest, longest]`` pair of pulse widths, ms (or None)."""
    if pair is None:
        return None
    if not isinstance(pair, (list, tuple)) or len(pair) != 2:
        raise ConfigError(field, pair, "a pair [shortest, longest] of pulse widths (ms)")
    lo = validate.physical(f"{field}[0]", pair[0], "pulse_ms")
    hi = validate.physical(f"{field}[1]", pair[1], "pulse_ms")
    if lo > hi:
        raise ConfigError(field, list(pair), "shortest <= longest (ms)")
    return (lo, hi)


@dataclass(frozen=True, kw_only=True)
class StrengthDuration:
    """A threshold irradiance that depends on the pulse width.

    Parameters
    ----------
    rheobase_mw_per_mm2 : float
        Threshold of an endless pulse, mW/mm² of photodiode irradiance.
    chronaxie_ms : float
        Pulse width at which the threshold is twice the rheobase, ms.
    law : {"weiss", "lapicque"}
        The law (module notes).
    pulse_range_ms : pair of float, optional
        Pulse widths the curve was measured over; outside them the threshold is
        refused. None: any pulse width.
    source : str
        Where the rheobase and chronaxie come from.
    field : str
        Key path prefix for error messages.
    """

    rheobase_mw_per_mm2: float
    chronaxie_ms: float
    law: str = "weiss"
    pulse_range_ms: tuple[float, float] | None = None
    source: str = "given by the user"
    field: str = "implant"

    def __post_init__(self) -> None:
        f = object.__setattr__
        p = self.field
        f(
            self,
            "rheobase_mw_per_mm2",
            validate.physical(
                f"{p}.threshold_rheobase_mw_per_mm2",
                self.rheobase_mw_per_mm2,
                "stimulation_threshold_mw_per_mm2",
            ),
        )
        f(
            self,
            "chronaxie_ms",
            validate.physical(f"{p}.threshold_chronaxie_ms", self.chronaxie_ms, "chronaxie_ms"),
        )
        f(self, "law", validate.choice(f"{p}.threshold_law", self.law, LAWS))
        f(
            self,
            "pulse_range_ms",
            check_pulse_range(f"{p}.threshold_pulse_range_ms", self.pulse_range_ms),
        )
        if not isinstance(self.source, str):
            raise ConfigError(f"{p}.threshold_source", self.source, "a string")

    def threshold_mw_per_mm2(self, pulse_ms: float) -> float:
        """The threshold irradiance at a pulse width, mW/mm².

        Raises
        ------
        ConfigError
            Naming ``pulse_ms`` when it lies outside ``pulse_range_ms``.
        """
        t = validate.physical("pulse_ms", pulse_ms, "pulse_ms")
        r = self.pulse_range_ms
        if r is not None and not (r[0] <= t <= r[1]):
            raise ConfigError(
                "pulse_ms",
                t,
                f"in [{r[0]:g}, {r[1]:g}] ms, where the strength–duration curve holds",
                f"{self.field}.threshold_pulse_range_ms; the curve is not extrapolated",
            )
        law = weiss_threshold if self.law == "weiss" else lapicque_threshold
        return law(t, rheobase=self.rheobase_mw_per_mm2, chronaxie_ms=self.chronaxie_ms)

    def describe(self) -> str:
        """One line: the law, its two parameters and the source."""
        text = (
            f"{self.law.capitalize()} law, rheobase {self.rheobase_mw_per_mm2:.3g} mW/mm², "
            f"chronaxie {self.chronaxie_ms:.3g} ms"
        )
        if self.pulse_range_ms is not None:
            text += f" (pulses {self.pulse_range_ms[0]:g}-{self.pulse_range_ms[1]:g} ms)"
        return f"{text}; {self.source}"
