"""Laser power for a target irradiance, and the largest power within every limit.

Retinal irradiance and every exposure ratio are linear in laser power, so one
assessment at a known power gives both figures for any power.

References
----------
.. [1] common practice: irradiance and exposure are linear in laser power.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

from .. import validate
from ..cautions import CAUTION_SHORT, CAUTIONS, EDITION
from ..errors import ConfigError
from .assess import ExposureAssessment
from .pulses import margin_of, verdict_of

__all__ = ["PerMilliwatt", "PowerPlan", "PowerComparison", "plan_power", "compare_power"]


@dataclass(frozen=True)
class PerMilliwatt:
    """Quantities per mW of laser power (everything here is linear in laser power).

    Parameters
    ----------
    irradiance_mw_per_mm2 : float
        Retinal irradiance per mW of laser power (e.g. the mean or the minimum
        over ON pixels), mW/mm^2 per mW, > 0.
    worst_ratio : float
        Worst exposure/limit ratio of the standard per mW, >= 0.
    protocol_ratio : float, optional
        Worst ratio to a protocol cap per mW.
    label : str
        ``"hologram"``, ``"amplitude mask"``, ...
    irradiance_basis : str
        What ``irradiance_mw_per_mm2`` is (``"mean ON-pixel irradiance"``).
    """

    irradiance_mw_per_mm2: float
    worst_ratio: float
    protocol_ratio: float | None = None
    label: str = "hologram"
    irradiance_basis: str = "mean ON-pixel irradiance"

    def __post_init__(self) -> None:
        object.__setattr__(
            self,
            "irradiance_mw_per_mm2",
            validate.number(
                f"{self.label}.irradiance_mw_per_mm2 (per mW)",
                self.irradiance_mw_per_mm2,
                lo=0.0,
                lo_open=True,
            ),
        )
        object.__setattr__(
            self,
            "worst_ratio",
            validate.number(f"{self.label}.worst_ratio (per mW)", self.worst_ratio, lo=0.0),
        )
        if self.protocol_ratio is not None:
            object.__setattr__(
                self,
                "protocol_ratio",
                validate.number(
                    f"{self.label}.protocol_ratio (per mW)", self.protocol_ratio, lo=0.0
                ),
            )

    @classmethod
    def from_assessment(
        cls,
        assessment: ExposureAssessment,
        laser_power_mw: float,
        irradiance_mw_per_mm2: float,
        *,
        label: str = "hologram",
        irradiance_basis: str = "mean ON-pixel irradiance",
    ) -> PerMilliwatt:
        """Divide an assessment made at ``laser_power_mw`` by that power."""
        p = validate.number("laser_power_mw", laser_power_mw, lo=0.0, lo_open=True)
        e = validate.number("irradiance_mw_per_mm2", irradiance_mw_per_mm2, lo=0.0, lo_open=True)
        return cls(
            e / p,
            assessment.worst_ratio / p,
            None if assessment.protocol is None else assessment.protocol.worst_ratio / p,
            label,
            irradiance_basis,
        )


@dataclass(frozen=True)
class PowerPlan:
    """Laser power for a target irradiance, and the largest power within every limit."""

    label: str
    irradiance_basis: str
    target_irradiance_mw_per_mm2: float
    laser_power_mw: float
    worst_ratio: float
    protocol_ratio: float | None
    max_laser_power_standard_mw: float
    max_laser_power_mw: float
    max_irradiance_mw_per_mm2: float
    margin: float
    verdict: str
    laser_max_mw: float | None
    reachable: bool
    per_mw: PerMilliwatt
    edition: str = EDITION
    caution: str = field(default=CAUTION_SHORT, repr=False)

    def describe(self) -> str:
        text = (
            f"{self.label}: {self.laser_power_mw:.4g} mW of laser power for "
            f"{self.target_irradiance_mw_per_mm2:.4g} mW/mm^2 ({self.irradiance_basis}); "
            f"exposure {self.worst_ratio:.3g} of the limit"
        )
        if self.protocol_ratio is not None:
            text += f", {self.protocol_ratio:.3g} of the protocol cap"
        text += (
            f"; {self.verdict}; largest power within every limit "
            f"{self.max_laser_power_mw:.4g} mW (= {self.max_irradiance_mw_per_mm2:.4g} mW/mm^2)"
        )
        if not self.reachable:
            text += f"; the laser gives only {self.laser_max_mw:.4g} mW"
        return text

    def summary(self) -> str:
        return "\n".join([f"Power plan ({self.edition})", "  " + self.describe(), CAUTIONS])


def plan_power(
    target_irradiance_mw_per_mm2: float,
    per_mw: PerMilliwatt,
    *,
    laser_max_mw: float | None = None,
) -> PowerPlan:
    """Laser power for a target irradiance and the largest power within every limit.

    Parameters
    ----------
    target_irradiance_mw_per_mm2 : float
        Wanted retinal irradiance (of the kind ``per_mw.irradiance_basis``), > 0.
    per_mw : PerMilliwatt
        Irradiance and exposure ratios per mW of laser power.
    laser_max_mw : float, optional
        What the laser can deliver.

    Returns
    -------
    PowerPlan
        ``laser_power_mw = target / irradiance_per_mw``; the exposure ratio at
        that power is ``worst_ratio_per_mw * laser_power_mw``; the largest power
        within the standard is ``1 / worst_ratio_per_mw`` and, with a protocol,
        the smaller of that and ``1 / protocol_ratio_per_mw``.

    References
    ----------
    .. [1] common practice: irradiance and exposure are linear in laser power.
    """
    target = validate.number(
        "target_irradiance_mw_per_mm2", target_irradiance_mw_per_mm2, lo=0.0, lo_open=True
    )
    if not isinstance(per_mw, PerMilliwatt):
        raise ConfigError("per_mw", per_mw, "a PerMilliwatt")
    lmax = (
        None
        if laser_max_mw is None
        else validate.number("laser_max_mw", laser_max_mw, lo=0.0, lo_open=True)
    )
    power = target / per_mw.irradiance_mw_per_mm2
    ratio = per_mw.worst_ratio * power
    pratio = None if per_mw.protocol_ratio is None else per_mw.protocol_ratio * power
    p_std = math.inf if per_mw.worst_ratio == 0 else 1.0 / per_mw.worst_ratio
    p_max = p_std
    if per_mw.protocol_ratio:
        p_max = min(p_max, 1.0 / per_mw.protocol_ratio)
    worst = max(ratio, pratio or 0.0)
    return PowerPlan(
        label=per_mw.label,
        irradiance_basis=per_mw.irradiance_basis,
        target_irradiance_mw_per_mm2=target,
        laser_power_mw=power,
        worst_ratio=ratio,
        protocol_ratio=pratio,
        max_laser_power_standard_mw=p_std,
        max_laser_power_mw=p_max,
        max_irradiance_mw_per_mm2=p_max * per_mw.irradiance_mw_per_mm2,
        margin=margin_of(ratio),
        verdict=verdict_of(worst),
        laser_max_mw=lmax,
        reachable=lmax is None or power <= lmax,
        per_mw=per_mw,
    )


@dataclass(frozen=True)
class PowerComparison:
    """A hologram and an amplitude-mask baseline planned for the same target."""

    hologram: PowerPlan
    baseline: PowerPlan
    power_ratio: float
    safe_irradiance_ratio: float
    edition: str = EDITION
    caution: str = field(default=CAUTION_SHORT, repr=False)

    def summary(self) -> str:
        return "\n".join(
            [
                f"Power plan, hologram beside {self.baseline.label} ({self.edition})",
                "  " + self.hologram.describe(),
                "  " + self.baseline.describe(),
                f"  the {self.baseline.label} needs {self.power_ratio:.3g}x the laser power; "
                f"the hologram reaches {self.safe_irradiance_ratio:.3g}x its irradiance "
                "within every limit",
                CAUTIONS,
            ]
        )


def compare_power(
    target_irradiance_mw_per_mm2: float,
    hologram: PerMilliwatt,
    baseline: PerMilliwatt,
    *,
    laser_max_mw: float | None = None,
) -> PowerComparison:
    """:func:`plan_power` for a hologram and an amplitude-mask baseline side by side.

    Returns
    -------
    PowerComparison
        Both plans, the ratio of laser powers needed (baseline / hologram) and
        the ratio of the largest irradiances within every limit (hologram /
        baseline).

    References
    ----------
    .. [1] common practice: irradiance and exposure are linear in laser power.
    """
    h = plan_power(target_irradiance_mw_per_mm2, hologram, laser_max_mw=laser_max_mw)
    b = plan_power(target_irradiance_mw_per_mm2, baseline, laser_max_mw=laser_max_mw)
    safe = (
        math.inf
        if b.max_irradiance_mw_per_mm2 == 0
        else h.max_irradiance_mw_per_mm2 / b.max_irradiance_mw_per_mm2
    )
    return PowerComparison(h, b, b.laser_power_mw / h.laser_power_mw, safe)
