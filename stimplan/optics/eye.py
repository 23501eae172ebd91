"""Eye presets: human, rat and mouse.

Each preset is a :class:`stimplan.optics.system.Eye` (retinal µm per degree of visual
angle, pupil diameter, ocular transmission at the planned wavelength). Every
value names its source; values recalled without the text at hand are marked
*from memory* and should be replaced by measured ones for a given set-up (pass
them as overrides to :func:`eye_preset`).

The transmission is computed for each species at the wavelength
(:mod:`stimplan.optics.ocular`): the water absorption of Hale & Querry over
the eye's effective focal length, an upper bound (the safe side for the
retinal irradiance shown). A small eye passes more: at 880 nm the bound is
about 0.91 for the human eye (16.5 mm), 0.98 for the rat and 0.99 for the
mouse.

References
----------
.. [1] J. Drasdo and C. W. Fowler, "Non-linear projection of the retinal image
   in a wide-angle schematic eye", *Br. J. Ophthalmol.* 58, 709 (1974).
.. [2] S. Remtulla and P. E. Hallett, "A schematic eye for the mouse, and
   comparisons with the rat", *Vision Res.* 25, 21 (1985).
.. [3] E. A. Boettner and J. R. Wolter, "Transmission of the ocular media",
   *Invest. Ophthalmol.* 1, 776 (1962).
.. [4] G. M. Hale and M. R. Querry, "Optical constants of water in the
   200-nm to 200-µm wavelength region", *Appl. Opt.* 12, 555 (1973).
"""

from __future__ import annotations

import math
from types import MappingProxyType
from typing import Any

from .. import validate
from ..errors import ConfigError
from .ocular import water_path_transmission
from .system import Eye

__all__ = [
    "HUMAN_UM_PER_DEG",
    "MOUSE_UM_PER_DEG",
    "RAT_TO_MOUSE_SCALE",
    "RAT_UM_PER_DEG",
    "PRESET_WAVELENGTH_NM",
    "preset_transmission",
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

#: The wavelength of :data:`EYE_PRESETS`, nm (the illumination's default).
PRESET_WAVELENGTH_NM = 880.0

# Pupil diameters, mm (dilated).
#: Human dilated pupil 7-8 mm, from memory; 7 mm is also the limiting aperture
#: of the laser-safety standards, so it is the conservative choice.
HUMAN_PUPIL_MM = 7.0
#: Rat dilated pupil, from memory (about 4-5 mm); replace by a measured value.
RAT_PUPIL_MM = 4.5
#: Mouse dilated pupil, from memory (about 2 mm); replace by a measured value.
MOUSE_PUPIL_MM = 2.0

_SCALES = {
    "human": (HUMAN_UM_PER_DEG, HUMAN_PUPIL_MM),
    "rat": (RAT_UM_PER_DEG, RAT_PUPIL_MM),
    "mouse": (MOUSE_UM_PER_DEG, MOUSE_PUPIL_MM),
}


def preset_transmission(um_per_deg: float, wavelength_nm: float) -> tuple[float, str]:
    """The water-path bound of an eye's transmission at a wavelength, and its basis in words.

    The path is the eye's effective focal length, ``um_per_deg * 180/π`` µm
    (:mod:`stimplan.optics.ocular`).

    References
    ----------
    .. [1] Hale & Querry, *Appl. Opt.* 12, 555 (1973).
    """
    path_mm = validate.physical("eye.um_per_deg", um_per_deg, "eye_um_per_deg") * (
        180.0 / math.pi * 1e-3
    )
    tau = water_path_transmission(wavelength_nm=wavelength_nm, water_path_mm=path_mm)
    basis = (
        f"upper bound at {wavelength_nm:g} nm: water absorption (Hale & Querry 1973) over "
        f"the eye's effective focal length {path_mm:.3g} mm; no reflection or scattering loss"
    )
    return tau, basis


def _preset(name: str, wavelength_nm: float) -> Eye:
    um_per_deg, pupil_mm = _SCALES[name]
    tau, basis = preset_transmission(um_per_deg, wavelength_nm)
    return Eye(
        um_per_deg=um_per_deg,
        pupil_diameter_mm=pupil_mm,
        transmission=tau,
        name=name,
        transmission_basis=basis,
    )


EYE_PRESETS: MappingProxyType[str, Eye] = MappingProxyType(
    {name: _preset(name, PRESET_WAVELENGTH_NM) for name in _SCALES}
)
"""The presets by name, at 880 nm. Read-only; use :func:`eye_preset` for variants."""

_OVERRIDABLE = ("um_per_deg", "pupil_diameter_mm", "transmission", "name", "transmission_basis")


def eye_names() -> tuple[str, ...]:
    """Names of the eye presets."""
    return tuple(EYE_PRESETS)


def eye_preset(name: str, *, wavelength_nm: float = PRESET_WAVELENGTH_NM, **overrides: Any) -> Eye:
    """An eye preset at a wavelength, optionally with some values replaced.

    Parameters
    ----------
    name : {"human", "rat", "mouse"}
        The species (case-insensitive).
    wavelength_nm : float
        The planned wavelength, nm, in [400, 1000] unless ``transmission`` is
        given: the preset's transmission is computed there.
    **overrides
        Any of ``um_per_deg``, ``pupil_diameter_mm``, ``transmission`` and
        ``name`` (and ``transmission_basis``, a note on where a given
        transmission comes from), e.g. ``eye_preset("human", um_per_deg=300.0)`` for groups
        that use 300 µm/deg, or a measured ``transmission``. Values are
        validated by :class:`Eye`. A changed ``um_per_deg`` changes the water
        path of the computed transmission.

    Returns
    -------
    Eye

    Raises
    ------
    ConfigError
        For an unknown preset name or override key, an out-of-range value, or
        a wavelength outside 400-1000 nm without a given ``transmission``.

    Notes
    -----
    ============  ============  ===============  ======================  =======================
    preset        µm/deg        pupil (mm)       transmission at 880 nm  sources
    ============  ============  ===============  ======================  =======================
    human         288           7 (from memory)  0.912 (upper bound)     Drasdo & Fowler 1974
    rat           31 × 1.95     4.5 (memory)     0.981 (upper bound)     Remtulla & Hallett 1985
    mouse         31 (memory)   2.0 (memory)     0.990 (upper bound)     Remtulla & Hallett 1985
    ============  ============  ===============  ======================  =======================

    The transmissions are ``exp(-alpha L)`` with water's absorption
    coefficient ``alpha`` (Hale & Querry 1973) and ``L`` the eye's effective
    focal length: upper bounds (:mod:`stimplan.optics.ocular`). Measured
    whole-eye transmittance of the human eye peaks at about 0.84 between 650
    and 850 nm (Boettner & Wolter 1962), below the bound, as it must be.

    References
    ----------
    .. [1] Drasdo & Fowler, *Br. J. Ophthalmol.* 58, 709 (1974).
    .. [2] Remtulla & Hallett, *Vision Res.* 25, 21 (1985).
    .. [3] Boettner & Wolter, *Invest. Ophthalmol.* 1, 776 (1962).
    .. [4] Hale & Querry, *Appl. Opt.* 12, 555 (1973).
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
    if "transmission_basis" in overrides and "transmission" not in overrides:
        raise ConfigError(
            "eye.transmission_basis",
            overrides["transmission_basis"],
            "given with a transmission",
            "a preset's own transmission carries its own basis",
        )
    values = {k: getattr(base, k) for k in _OVERRIDABLE}
    values.update(overrides)
    if "transmission" in overrides:
        values["transmission_basis"] = overrides.get("transmission_basis", "given")
    else:
        tau, basis = preset_transmission(values["um_per_deg"], wavelength_nm)
        values["transmission"] = tau
        values["transmission_basis"] = basis
    return Eye(**values)
