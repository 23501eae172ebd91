"""Plausibility ranges of the physical inputs.

Every physical number a user writes (a power, a magnification, a size, a
pitch, a duration) must lie in a finite interval that some real bench could
reach. The intervals are wide on purpose: they do not judge an experiment,
they stop values that no apparatus has (``power_mw = 1e300``, a relay that
magnifies 10^12 times, a 1 km implant) before they turn into overflow, an
efficiency of zero or an error about a key the user never wrote.

Each range carries its reason, which the error message repeats. The bounds
are round numbers chosen well outside the hardware we know of (``# common
practice``); none of them is a safety limit, and staying inside one says
nothing about exposure.
"""

from __future__ import annotations

from dataclasses import dataclass
from types import MappingProxyType

__all__ = ["PhysicalRange", "RANGES"]


@dataclass(frozen=True)
class PhysicalRange:
    """A closed interval ``[lo, hi]`` (``lo`` excluded when ``lo_open``) and why.

    Parameters
    ----------
    lo, hi : float
        Bounds in the quantity's own unit (the unit is in the key's name).
    reason : str
        Why values outside cannot describe a real bench; shown in errors.
    lo_open : bool
        Whether ``lo`` itself is excluded (``lo = 0`` for a strictly positive value).
    """

    lo: float
    hi: float
    reason: str
    lo_open: bool = False


_NO_RETINA = "no retina is that large"
_TABLES_END = "the exposure tables end at 3e4 s (8.3 h)"

#: The ranges by quantity. Keys name the quantity and its unit; several
#: sequence keys share one quantity (every retinal length uses ``retinal_length_um``).
RANGES = MappingProxyType(
    {
        "laser_power_mw": PhysicalRange(
            0.0, 1e4, "10 W is far more than a phase SLM can take", lo_open=True
        ),
        "irradiance_mw_per_mm2": PhysicalRange(
            0.0, 1e4, "10 W/mm² on the retina is beyond any exposure limit", lo_open=True
        ),
        "beam_waist_mm": PhysicalRange(
            1e-3, 1e3, "a beam under 1 µm or over 1 m wide cannot illuminate an SLM"
        ),
        "magnification": PhysicalRange(
            1e-3, 1e3, "a relay between SLM and eye images 1000x reduced to 1000x enlarged"
        ),
        "fresnel_focal_mm": PhysicalRange(
            1.0, 1e7, "|f| under 1 mm aliases on any SLM pixel; beyond 10 km the lens is flat"
        ),
        "m_squared": PhysicalRange(
            1.0,
            1e4,
            "M² is 1 for a Gaussian beam and never less; high-power multimode diodes reach "
            "hundreds to thousands",
        ),
        "fibre_core_um": PhysicalRange(
            1.0, 3000.0, "multimode fibre cores range from tens of µm to a few mm"
        ),
        "slm_pitch_um": PhysicalRange(
            1.0, 200.0, "phase SLMs have pixels of a few to a few tens of µm"
        ),
        "slm_fringing_um": PhysicalRange(
            0.0,
            50.0,
            "the fringing field spreads about a liquid-crystal layer's thickness (a few µm) "
            "across a pixel edge; it is also at most the pitch",
        ),
        "eye_um_per_deg": PhysicalRange(
            5.0, 2000.0, "eyes range from a mouse's (tens of µm/deg) to a few times a human's"
        ),
        "eye_focal_length_mm": PhysicalRange(
            0.25, 120.0, "eyes range from a mouse's (about 2 mm) to a few times a human's"
        ),
        "pupil_diameter_mm": PhysicalRange(0.05, 20.0, "no eye has a pupil outside 50 µm to 20 mm"),
        "implant_pitch_um": PhysicalRange(1.0, 5000.0, "implant pixels are tens to hundreds of µm"),
        "stimulation_threshold_mw_per_mm2": PhysicalRange(
            1e-4,
            1e3,
            "published photovoltaic thresholds lie between hundredths and tens of mW/mm²; "
            "1 W/mm² on the retina is beyond any exposure limit",
        ),
        "responsivity_a_per_w": PhysicalRange(
            0.0,
            0.9,
            "one electron per photon gives at most e·λ/(h·c) = λ[µm]/1.24 A/W, under 0.9 A/W "
            "for every wavelength silicon absorbs (below 1.1 µm)",
            lo_open=True,
        ),
        "chronaxie_ms": PhysicalRange(
            1e-3,
            1e3,
            "neural chronaxies lie between tens of µs and tens of ms; 1 µs to 1 s holds them all",
        ),
        "retinal_length_um": PhysicalRange(0.0, 1e5, _NO_RETINA, lo_open=True),
        "retinal_position_um": PhysicalRange(-1e5, 1e5, _NO_RETINA),
        "angle_deg": PhysicalRange(
            -360.0, 360.0, "one turn either way holds every orientation and phase"
        ),
        "contrast_ratio": PhysicalRange(1.0, 1e9, "no projector has a contrast above 10^9:1"),
        "duration_ms": PhysicalRange(0.0, 3e7, _TABLES_END, lo_open=True),
        "blank_ms": PhysicalRange(0.0, 3e7, _TABLES_END),
        "pulse_ms": PhysicalRange(
            1e-6, 3e7, "pulses under 1 ns are outside the supported regime; " + _TABLES_END
        ),
        "pulse_delay_ms": PhysicalRange(0.0, 3e7, _TABLES_END),
        "jitter_ms": PhysicalRange(0.0, 3e7, _TABLES_END),
        "slm_settle_ms": PhysicalRange(
            0.0,
            1e4,
            "liquid-crystal phase SLMs settle in milliseconds to tenths of a second; "
            "10 s is beyond any",
        ),
        "rate_hz": PhysicalRange(
            1e-6,
            1e9,
            "below 1e-6 Hz (one pulse in 11 days) there is no train; pulses under 1 ns are "
            "not supported, so no rate above 1 GHz",
        ),
    }
)
