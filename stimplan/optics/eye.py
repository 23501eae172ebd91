"""Eye presets: human, rat and mouse.

Each preset is a :class:`stimplan.optics.system.Eye` (retinal µm per degree of visual
angle, pupil diameter, ocular transmission at the near-infrared working
wavelength). Every value names its source; values recalled without the text
at hand are marked *from memory* and should be replaced by measured ones for a
given set-up (pass them as overrides to :func:`eye_preset`).

References
----------
.. [1] J. Drasdo and C. W. Fowler, "Non-linear projection of the retinal image
   in a wide-angle schematic eye", *Br. J. Ophthalmol.* 58, 709 (1974).
.. [2] S. Remtulla and P. E. Hallett, "A schematic eye for the mouse, and
   comparisons with the rat", *Vision Res.* 25, 21 (1985).
.. [3] E. A. Boettner and J. R. Wolter, "Transmission of the ocular media",
   *Invest. Ophthalmol.* 1, 776 (1962).
"""

from __future__ import annotations

from types import MappingProxyType
from typing import Any

from ..errors import ConfigError
from .system import Eye

__all__ = [
    "HUMAN_UM_PER_DEG",
    "MOUSE_UM_PER_DEG",
    "RAT_TO_MOUSE_SCALE",
    "RAT_UM_PER_DEG",
    "NIR_OCULAR_TRANSMISSION",
    "EYE_PRESETS",
    "eye_preset",
    "eye_names",
]

#: Human retina near the posterior pole, µm per degree (Drasdo & Fowler 1974).
HUMAN_UM_PER_DEG = 288.0

#: Mouse retina, µm per degree; from memory (Remtulla & Hallett 1985).
MOUSE_UM_PER_DEG = 31.0

#: Linear scale of the rat eye relative to the mouse eye: 1.9-2.0 (Remtulla &
#: Hallett 1985); the middle of that range is used.
RAT_TO_MOUSE_SCALE = 1.95

#: Rat retina, µm per degree, derived as mouse × rat-to-mouse scale
#: (≈ 59-62 µm/deg over the published range of the scale).
RAT_UM_PER_DEG = MOUSE_UM_PER_DEG * RAT_TO_MOUSE_SCALE

#: Transmission of the ocular media at 880-905 nm. The media transmit at most
#: about 84 % between 650 and 850 nm (Boettner & Wolter 1962); 0.8 further
#: into the near infrared is an estimate from memory.
NIR_OCULAR_TRANSMISSION = 0.8

# Pupil diameters, mm (dilated).
#: Human dilated pupil 7-8 mm, from memory; 7 mm is also the limiting aperture
#: of the laser-safety standards, so it is the conservative choice.
HUMAN_PUPIL_MM = 7.0
#: Rat dilated pupil, from memory (about 4-5 mm); replace by a measured value.
RAT_PUPIL_MM = 4.5
#: Mouse dilated pupil, from memory (about 2 mm); replace by a measured value.
MOUSE_PUPIL_MM = 2.0

EYE_PRESETS: MappingProxyType[str, Eye] = MappingProxyType(
    {
        "human": Eye(
            um_per_deg=HUMAN_UM_PER_DEG,
            pupil_diameter_mm=HUMAN_PUPIL_MM,
            transmission=NIR_OCULAR_TRANSMISSION,
            name="human",
        ),
        "rat": Eye(
            um_per_deg=RAT_UM_PER_DEG,
            pupil_diameter_mm=RAT_PUPIL_MM,
            transmission=NIR_OCULAR_TRANSMISSION,
            name="rat",
        ),
        "mouse": Eye(
            um_per_deg=MOUSE_UM_PER_DEG,
            pupil_diameter_mm=MOUSE_PUPIL_MM,
            transmission=NIR_OCULAR_TRANSMISSION,
            name="mouse",
        ),
    }
)
"""The presets by name. Read-only; use :func:`eye_preset` for variants."""

_OVERRIDABLE = ("um_per_deg", "pupil_diameter_mm", "transmission", "name")


def eye_names() -> tuple[str, ...]:
    """Names of the eye presets."""
    return tuple(EYE_PRESETS)


def eye_preset(name: str, **overrides: Any) -> Eye:
    """An eye preset, optionally with some values replaced.

    Parameters
    ----------
    name : {"human", "rat", "mouse"}
        The species (case-insensitive).
    **overrides
        Any of ``um_per_deg``, ``pupil_diameter_mm``, ``transmission`` and
        ``name``, e.g. ``eye_preset("human", um_per_deg=300.0)`` for groups
        that use 300 µm/deg. Values are validated by :class:`Eye`.

    Returns
    -------
    Eye

    Raises
    ------
    ConfigError
        For an unknown preset name or override key, or an out-of-range value.

    Notes
    -----
    ============  ============  ===============  ============  =======================
    preset        µm/deg        pupil (mm)       transmission  sources
    ============  ============  ===============  ============  =======================
    human         288           7 (from memory)  0.8 (est.)    Drasdo & Fowler 1974
    rat           31 × 1.95     4.5 (memory)     0.8 (est.)    Remtulla & Hallett 1985
    mouse         31 (memory)   2.0 (memory)     0.8 (est.)    Remtulla & Hallett 1985
    ============  ============  ===============  ============  =======================

    References
    ----------
    .. [1] Drasdo & Fowler, *Br. J. Ophthalmol.* 58, 709 (1974).
    .. [2] Remtulla & Hallett, *Vision Res.* 25, 21 (1985).
    .. [3] Boettner & Wolter, *Invest. Ophthalmol.* 1, 776 (1962).
    """
    key = name.strip().lower() if isinstance(name, str) else name
    if key not in EYE_PRESETS:
        raise ConfigError("eye.preset", name, "one of " + ", ".join(repr(n) for n in EYE_PRESETS))
    base = EYE_PRESETS[key]
    for k in overrides:
        if k not in _OVERRIDABLE:
            raise ConfigError(
                f"eye.{k}", overrides[k], "an override among " + ", ".join(_OVERRIDABLE)
            )
    values = {k: getattr(base, k) for k in _OVERRIDABLE}
    values.update(overrides)
    return Eye(**values)
