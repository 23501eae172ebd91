"""The optical system: SLM, illumination, relay and eye.

The SLM plane is imaged onto the eye's pupil by a relay of lateral
magnification ``M``; the eye's optics then form the Fraunhofer (far-field)
pattern of the pupil field on the retina. Every scale that follows from that
chain is derived here, in one place:

* retinal sample pitch of the far field, ``λ f_eye / (N p M)``;
* retinal field width (one diffraction order of the pixelated SLM),
  ``λ f_eye / (p M)``;
* largest steerable angle, ``λ / (2 p M)`` (half the field, in the eye);
* beam diameter at the pupil, and a warning when it overfills the pupil.

References
----------
.. [1] J. W. Goodman, *Introduction to Fourier Optics*, 3rd ed., Roberts & Co.
   (2005), §5.2 (Fourier-transforming property of lenses).
.. [2] A. E. Siegman, *Lasers*, University Science Books (1986), ch. 17.
"""

from __future__ import annotations

import math
import warnings
from dataclasses import dataclass, field
from pathlib import Path
from typing import Literal

import numpy as np

from .. import validate
from ..errors import ConfigError
from ..grid import RetinalGrid
from ..io_images import read_scalar_image
from .source import (
    NO_BLUR,
    SourceBlur,
    fibre_blur_radius_um,
    gaussian_blur_sigma_um,
    modulated_share,
)

__all__ = [
    "SLM",
    "Illumination",
    "Relay",
    "Eye",
    "OpticalSystem",
    "PupilOverfillWarning",
]

MAX_SLM_PIXELS = 8192


class PupilOverfillWarning(UserWarning):
    """The beam at the pupil is larger than the pupil: light is clipped."""


@dataclass(frozen=True)
class SLM:
    """A phase-only spatial light modulator.

    Parameters
    ----------
    pixels_x, pixels_y : int
        Number of pixel columns and rows.
    pitch_um : float
        Pixel pitch, micrometres, > 0.
    fill_factor : float
        Fraction of each pixel's area that modulates light, in (0, 1].
        The pixel aperture is taken as a centred square of side
        ``pitch_um * sqrt(fill_factor)``.
    phase_levels : int
        Number of distinct phase levels the SLM can show, >= 2
        (``2**bit_depth`` for a linear drive).
    grey_2pi : int, optional
        Linear lookup: the grey value that gives a 2π phase delay. Level ``k``
        (phase ``2πk/L``) is shown as grey ``round(k * grey_2pi / L)``.
        Defaults to ``phase_levels``, i.e. grey = level.
    lut_file : str, optional
        A measured lookup table instead of the linear one: a text/CSV file
        with two columns, ``grey`` and ``phase_rad`` (measured phase of that
        grey value). Each level is shown with the grey whose measured phase
        is nearest (mod 2π) to the level's phase, and the prediction uses the
        measured phase.
    zero_order_fraction : float
        Fraction of the modulated polarisation's light leaving the pixel
        apertures that the SLM leaves unmodulated (it forms the zero order),
        in [0, 1). The polarisation the SLM does not modulate goes to the zero
        order as well (:attr:`OpticalSystem.unmodulated_fraction`).
    zero_order_incoherent_share : float
        Share of that zero order that does not interfere with the modulated
        light (phase flicker of the liquid crystal, a relative phase that
        drifts within a pulse), in [0, 1]. The rest is coherent with it: the
        map shows the mean over the unknown relative phase (the two added in
        intensity), the exposure takes the worst phase,
        ``I_mod + I_zero + 2 sqrt(c I_mod I_zero)`` with ``c`` the coherent
        share. Default 0: all coherent, the conservative reading.
    reflectance : float
        Share of the light on the pixel apertures that the SLM reflects
        (mirror, cover glass, liquid-crystal absorption), in (0, 1]. Default
        1: the ideal, lossless SLM; set your measured value (no published
        figure holds for every device).
    fringing_um : float
        Width of the fringing-field transition at each pixel edge, µm, in
        [0, pitch_um]: the realised phase is the pixelated phase smoothed by a
        box of this width (a linear transition between neighbours), and the
        prediction computes the far field from ``fringing_samples``² sub-pixel
        samples (:mod:`stimplan.holography.crosstalk`). Default 0: no
        crosstalk, the ideal SLM. No published value holds for every device
        (it grows with the liquid-crystal layer's thickness relative to the
        pitch, from memory; see [2]_, [3]_); set your device's measured value.
    fringing_samples : int, optional
        Sub-pixel samples per pixel and axis when ``fringing_um > 0``, in
        [2, 16], and at least ``2 / w`` for a transition of ``w`` pixels (so
        that each transition holds a sample). Default: ``ceil(4 / w)``, at
        least 2 and at most 16, which puts the first-order efficiency of a
        blazed grating within about 0.2 % of its exact value; a transition
        narrower than ``pitch_um / 8`` is refused (16 samples cannot resolve
        it). The prediction costs ``fringing_samples²`` FFTs of the
        prediction grid instead of one.

    References
    ----------
    .. [1] J. W. Goodman, *Introduction to Fourier Optics*, 3rd ed., §7.2
       (spatial light modulators).
    .. [2] M. Persson et al., Opt. Express 20, 22334 (2012).
    .. [3] S. Moser et al., Opt. Express 27, 25046 (2019).
    """

    pixels_x: int = 1024
    pixels_y: int = 1024
    pitch_um: float = 8.0
    fill_factor: float = 0.95
    phase_levels: int = 256
    grey_2pi: int | None = None
    lut_file: str | None = None
    zero_order_fraction: float = 0.0
    reflectance: float = 1.0  # ideal; set your measured value (common practice)
    zero_order_incoherent_share: float = 0.0  # all coherent: the worst case for exposure
    fringing_um: float = 0.0  # no crosstalk: the ideal SLM (no published default for all devices)
    fringing_samples: int | None = None  # from fringing_um: ceil(4 / w) sub-pixel samples

    def __post_init__(self) -> None:
        f = object.__setattr__
        f(
            self,
            "pixels_x",
            validate.integer("slm.pixels_x", self.pixels_x, lo=2, hi=MAX_SLM_PIXELS),
        )
        f(
            self,
            "pixels_y",
            validate.integer("slm.pixels_y", self.pixels_y, lo=2, hi=MAX_SLM_PIXELS),
        )
        f(self, "pitch_um", validate.physical("slm.pitch_um", self.pitch_um, "slm_pitch_um"))
        f(
            self,
            "fill_factor",
            validate.number("slm.fill_factor", self.fill_factor, lo=0, hi=1, lo_open=True),
        )
        f(
            self,
            "phase_levels",
            validate.integer("slm.phase_levels", self.phase_levels, lo=2, hi=65536),
        )
        if self.grey_2pi is not None:
            f(self, "grey_2pi", validate.integer("slm.grey_2pi", self.grey_2pi, lo=1, hi=65535))
        f(
            self,
            "zero_order_fraction",
            validate.number(
                "slm.zero_order_fraction", self.zero_order_fraction, lo=0, hi=1, hi_open=True
            ),
        )
        f(
            self,
            "reflectance",
            validate.number("slm.reflectance", self.reflectance, lo=0, hi=1, lo_open=True),
        )
        f(
            self,
            "zero_order_incoherent_share",
            validate.number(
                "slm.zero_order_incoherent_share", self.zero_order_incoherent_share, lo=0, hi=1
            ),
        )
        f(
            self,
            "fringing_um",
            validate.physical("slm.fringing_um", self.fringing_um, "slm_fringing_um"),
        )
        if self.fringing_um > self.pitch_um:
            raise ConfigError(
                "slm.fringing_um",
                self.fringing_um,
                f"in [0, slm.pitch_um = {self.pitch_um:g}] (a transition at each pixel edge)",
            )
        if self.fringing_samples is not None:
            f(
                self,
                "fringing_samples",
                validate.integer("slm.fringing_samples", self.fringing_samples, lo=2, hi=16),
            )
        if self.fringing_um > 0:
            w_px = self.fringing_um / self.pitch_um
            need = math.ceil(2.0 / w_px - 1e-9)
            if need > 16:
                raise ConfigError(
                    "slm.fringing_um",
                    self.fringing_um,
                    f"0 (the ideal SLM) or at least slm.pitch_um / 8 = {self.pitch_um / 8:g} "
                    "(16 sub-pixel samples cannot resolve a narrower transition)",
                )
            if self.fringing_samples is not None and self.fringing_samples < need:
                raise ConfigError(
                    "slm.fringing_samples",
                    self.fringing_samples,
                    f"at least 2 / (fringing_um / pitch_um) = {need} for a transition of "
                    f"{w_px:.3g} pixels, at most 16",
                )
        if self.lut_file is not None and not isinstance(self.lut_file, (str, Path)):
            raise ConfigError("slm.lut_file", self.lut_file, "a file path")

    @classmethod
    def from_bit_depth(cls, bit_depth: int, **kwargs) -> SLM:
        """An SLM with ``2**bit_depth`` linear phase levels."""
        bits = validate.integer("slm.bit_depth", bit_depth, lo=1, hi=16)
        return cls(phase_levels=2**bits, **kwargs)

    @property
    def fringing_samples_per_pixel(self) -> int:
        """Sub-pixel samples per axis of the fringing model (``fringing_samples`` or its
        default ``ceil(4 / w)`` in [2, 16] for a transition of ``w`` pixels); 1 without
        fringing."""
        if self.fringing_um <= 0:
            return 1
        if self.fringing_samples is not None:
            return int(self.fringing_samples)
        return min(16, max(2, math.ceil(4.0 * self.pitch_um / self.fringing_um - 1e-9)))

    @property
    def shape(self) -> tuple[int, int]:
        """``(rows, cols)`` of the pixel array."""
        return (self.pixels_y, self.pixels_x)

    @property
    def width_mm(self) -> float:
        return self.pixels_x * self.pitch_um * 1e-3

    @property
    def height_mm(self) -> float:
        return self.pixels_y * self.pitch_um * 1e-3

    def pixel_coords_mm(self) -> tuple[np.ndarray, np.ndarray]:
        """Broadcastable ``(X, Y)`` of pixel centres in mm (y up), origin at the centre."""
        x = (np.arange(self.pixels_x) - self.pixels_x / 2 + 0.5) * self.pitch_um * 1e-3
        y = (self.pixels_y / 2 - 0.5 - np.arange(self.pixels_y)) * self.pitch_um * 1e-3
        return x[np.newaxis, :], y[:, np.newaxis]


@dataclass(frozen=True)
class Illumination:
    """The laser beam on the SLM.

    Parameters
    ----------
    wavelength_nm : float
        Vacuum wavelength, nm, in [400, 1400].
    power_mw : float
        Laser power incident on the SLM, mW, > 0.
    profile : {"flat", "gaussian", "file"}
        Beam profile. ``"flat"`` fills the SLM uniformly; ``"gaussian"`` has
        the 1/e² intensity radius ``waist_mm``; ``"file"`` reads a measured
        amplitude image (any scale; it is normalised to ``power_mw``).
    waist_mm : float
        1/e² intensity radius of the Gaussian beam at the SLM, mm.
    amplitude_file : str, optional
        Image of the measured field amplitude, same shape as the SLM.
    correction_phase_file : str, optional
        Measured correction phase (e.g. for aberrations), an image of the SLM's
        shape. Grey values are mapped linearly so that the full range of the
        image's integer type is 2π, or, for float images, taken as radians.
        It is added to every hologram before quantisation.
    degree_of_polarisation : float
        ``P`` in [0, 1]: the polarised share of the light. Default 1, a
        polarised laser (the ideal case); a fibre-coupled multimode diode is
        close to 0 (:mod:`stimplan.optics.source`).
    polarisation_angle_deg : float
        Angle between the light's polarisation and the SLM's liquid-crystal
        director, degrees (default 0: aligned). The SLM modulates the share
        ``(1 + P cos 2θ) / 2``; the rest goes to the zero order.
    m_squared : float
        Beam propagation ratio ``M²`` >= 1 (default 1: a single-mode laser, no
        blur). Above 1 the retinal map is blurred by a Gaussian of the
        source's extra angular spread; needs ``profile = "gaussian"`` (the
        waist sets the diffraction-limited divergence).
    fibre_core_um, fibre_na : float, optional
        A multimode fibre's core diameter (µm) and numerical aperture,
        collimated onto the SLM into a beam of radius ``waist_mm``: the
        retinal map is blurred by a uniform disc (the fibre's angular spread).
        Both or neither; not together with ``m_squared > 1``.

    References
    ----------
    .. [1] A. E. Siegman, *Lasers* (1986), ch. 17 (Gaussian beams).
    .. [2] ISO 11146-1:2005 (beam propagation ratio; from memory).
    """

    wavelength_nm: float = 880.0
    power_mw: float = 10.0
    profile: Literal["flat", "gaussian", "file"] = "gaussian"
    waist_mm: float = 3.0
    amplitude_file: str | None = None
    correction_phase_file: str | None = None
    degree_of_polarisation: float = 1.0
    polarisation_angle_deg: float = 0.0
    m_squared: float = 1.0
    fibre_core_um: float | None = None
    fibre_na: float | None = None

    def __post_init__(self) -> None:
        f = object.__setattr__
        f(
            self,
            "wavelength_nm",
            validate.number("illumination.wavelength_nm", self.wavelength_nm, lo=400, hi=1400),
        )
        f(
            self,
            "power_mw",
            validate.physical("illumination.power_mw", self.power_mw, "laser_power_mw"),
        )
        validate.choice("illumination.profile", self.profile, ("flat", "gaussian", "file"))
        f(
            self,
            "waist_mm",
            validate.physical("illumination.waist_mm", self.waist_mm, "beam_waist_mm"),
        )
        if self.profile == "file" and not self.amplitude_file:
            raise ConfigError(
                "illumination.amplitude_file", None, "a file path when profile = 'file'"
            )
        self._check_source()

    def _check_source(self) -> None:
        """Validate the polarisation and coherence fields and the rules between them."""
        f = object.__setattr__
        f(
            self,
            "degree_of_polarisation",
            validate.number(
                "illumination.degree_of_polarisation", self.degree_of_polarisation, lo=0, hi=1
            ),
        )
        f(
            self,
            "polarisation_angle_deg",
            validate.physical(
                "illumination.polarisation_angle_deg", self.polarisation_angle_deg, "angle_deg"
            ),
        )
        f(
            self,
            "m_squared",
            validate.physical("illumination.m_squared", self.m_squared, "m_squared"),
        )
        if self.modulated_share <= 0.0:
            raise ConfigError(
                "illumination.polarisation_angle_deg",
                self.polarisation_angle_deg,
                "an angle that leaves some light in the SLM's modulated polarisation",
                "fully polarised light across the liquid crystal's director is not modulated",
            )
        given = [k for k in ("fibre_core_um", "fibre_na") if getattr(self, k) is not None]
        if len(given) == 1:
            other = "fibre_na" if given[0] == "fibre_core_um" else "fibre_core_um"
            raise ConfigError(
                f"illumination.{other}", None, "given with " + given[0], "a fibre needs both"
            )
        if given:
            f(
                self,
                "fibre_core_um",
                validate.physical(
                    "illumination.fibre_core_um", self.fibre_core_um, "fibre_core_um"
                ),
            )
            f(
                self,
                "fibre_na",
                validate.number("illumination.fibre_na", self.fibre_na, lo=0, hi=1, lo_open=True),
            )
            if self.m_squared != 1.0:
                raise ConfigError(
                    "illumination.m_squared",
                    self.m_squared,
                    "1 with a fibre (fibre_core_um, fibre_na)",
                    "the fibre's core and NA already set the angular spread",
                )
        if (given or self.m_squared > 1.0) and self.profile != "gaussian":
            key = "fibre_core_um" if given else "m_squared"
            raise ConfigError(
                f"illumination.{key}",
                getattr(self, key),
                "a single-mode source unless profile = 'gaussian'",
                "the angular spread of a multimode source is computed from the beam radius "
                "waist_mm on the SLM; flat and measured profiles are not supported",
            )

    @property
    def modulated_share(self) -> float:
        """Share of the light in the polarisation the SLM modulates, ``(1 + P cos 2θ) / 2``."""
        return modulated_share(self.degree_of_polarisation, self.polarisation_angle_deg)

    @property
    def single_mode(self) -> bool:
        """True for a single transverse mode (no blur of the retinal map)."""
        return self.m_squared == 1.0 and self.fibre_core_um is None

    @property
    def wavelength_mm(self) -> float:
        return self.wavelength_nm * 1e-6

    def amplitude(self, slm: SLM) -> np.ndarray:
        """Field amplitude on the SLM pixels, float32, with ``sum(|A|**2) == power_mw``.

        Parameters
        ----------
        slm : SLM

        Returns
        -------
        ndarray, shape ``slm.shape``
            Amplitude in sqrt(mW) per pixel.
        """
        if self.profile == "flat":
            intensity = np.ones(slm.shape, dtype=np.float64)
        elif self.profile == "gaussian":
            x, y = slm.pixel_coords_mm()
            intensity = np.exp(-2.0 * (x**2 + y**2) / self.waist_mm**2)
        else:
            amp = read_scalar_image(
                "illumination.amplitude_file", self.amplitude_file, shape=slm.shape
            ).astype(np.float64)
            if amp.min() < 0:
                raise ConfigError(
                    "illumination.amplitude_file", self.amplitude_file, "non-negative amplitudes"
                )
            intensity = amp**2
        total = float(intensity.sum())
        if total <= 0:
            raise ConfigError("illumination.amplitude_file", self.amplitude_file, "a non-zero beam")
        return np.sqrt(intensity * (self.power_mw / total)).astype(np.float32)

    def correction_phase_rad(self, slm: SLM) -> np.ndarray | None:
        """The measured correction phase in radians, or ``None``."""
        if not self.correction_phase_file:
            return None
        img = read_scalar_image(
            "illumination.correction_phase_file", self.correction_phase_file, shape=slm.shape
        )
        if np.issubdtype(img.dtype, np.integer):
            full = float(np.iinfo(img.dtype).max) + 1.0
            return (img.astype(np.float32) * np.float32(2 * np.pi / full)).astype(np.float32)
        return img.astype(np.float32)


@dataclass(frozen=True)
class Relay:
    """Relay optics from the SLM to the eye's pupil.

    Parameters
    ----------
    magnification : float
        Lateral magnification from the SLM plane to the pupil, > 0
        (beam at the pupil = beam at the SLM × magnification).
    fresnel_focal_mm : float, optional
        Focal length of a Fresnel lens term added to every hologram, mm. The
        relay is refocused so that the modulated light is sharp on the retina;
        the zero order, which does not carry the lens, is then defocused into
        a disc of diameter about ``D_slm * f_eff / fresnel_focal_mm``. Positive
        or negative; its magnitude must be at least ``N p² / λ`` so that the
        lens phase is sampled by the pixels without aliasing.
    transmission : float
        Share of the light leaving the SLM that the relay (lenses, mirrors,
        filters) passes to the eye, in (0, 1]. Default 1: an ideal, lossless
        relay; set your measured value.

    References
    ----------
    .. [1] J. W. Goodman, *Introduction to Fourier Optics*, 3rd ed., §5.1
       (thin lens as a quadratic phase).
    """

    magnification: float = 1.0
    fresnel_focal_mm: float | None = None
    transmission: float = 1.0  # ideal; set your measured value (common practice)

    def __post_init__(self) -> None:
        object.__setattr__(
            self,
            "magnification",
            validate.physical("relay.magnification", self.magnification, "magnification"),
        )
        object.__setattr__(
            self,
            "transmission",
            validate.number("relay.transmission", self.transmission, lo=0, hi=1, lo_open=True),
        )
        if self.fresnel_focal_mm is not None:
            fl = validate.physical(
                "relay.fresnel_focal_mm", self.fresnel_focal_mm, "fresnel_focal_mm", signed=True
            )
            object.__setattr__(self, "fresnel_focal_mm", fl)


@dataclass(frozen=True)
class Eye:
    """The eye that receives the pattern.

    Parameters
    ----------
    um_per_deg : float
        Retinal micrometres per degree of visual angle near the posterior
        pole, > 0. The eye's effective (posterior nodal) focal length follows
        as ``um_per_deg * 180 / π`` µm.
    pupil_diameter_mm : float
        Pupil diameter, mm, > 0.
    transmission : float
        Transmission of the ocular media at the working wavelength, in (0, 1].
        The presets compute it at the planned wavelength
        (:func:`stimplan.optics.eye.eye_preset`).
    name : str
        A label (``"human"``, ``"rat"``, ``"mouse"`` or ``"custom"``).
    transmission_basis : str
        Where ``transmission`` comes from, in words (shown in the report).

    References
    ----------
    .. [1] J. Drasdo and C. W. Fowler, "Non-linear projection of the retinal
       image in a wide-angle schematic eye", *Br. J. Ophthalmol.* 58, 709
       (1974).
    """

    um_per_deg: float = 288.0
    pupil_diameter_mm: float = 7.0
    transmission: float = 0.8
    name: str = "custom"
    transmission_basis: str = "given"

    def __post_init__(self) -> None:
        f = object.__setattr__
        f(
            self,
            "um_per_deg",
            validate.physical("eye.um_per_deg", self.um_per_deg, "eye_um_per_deg"),
        )
        f(
            self,
            "pupil_diameter_mm",
            validate.physical("eye.pupil_diameter_mm", self.pupil_diameter_mm, "pupil_diameter_mm"),
        )
        f(
            self,
            "transmission",
            validate.number("eye.transmission", self.transmission, lo=0, hi=1, lo_open=True),
        )
        if not isinstance(self.transmission_basis, str):
            raise ConfigError("eye.transmission_basis", self.transmission_basis, "a string")

    @property
    def focal_length_mm(self) -> float:
        """Effective focal length, mm (``um_per_deg * 180/π / 1000``)."""
        return self.um_per_deg * 180.0 / math.pi * 1e-3

    def deg_to_um(self, deg: float) -> float:
        """Retinal distance in µm for a visual angle in degrees (small-angle scale)."""
        return deg * self.um_per_deg

    def um_to_deg(self, um: float) -> float:
        """Visual angle in degrees for a retinal distance in µm."""
        return um / self.um_per_deg


@dataclass(frozen=True)
class OpticalSystem:
    """SLM, illumination, relay and eye together, with the derived scales.

    Parameters
    ----------
    slm : SLM
    illumination : Illumination
    relay : Relay
    eye : Eye

    Notes
    -----
    Far-field sampling: an ``N``-pixel SLM axis of pitch ``p`` gives ``N``
    far-field samples of retinal pitch ``λ f_eye / (N p M)``. The field of one
    diffraction order is ``λ f_eye / (p M)`` wide; the largest steerable angle
    in the eye is half of it, ``λ / (2 p M)`` radians.

    References
    ----------
    .. [1] J. W. Goodman, *Introduction to Fourier Optics*, 3rd ed., §4.2 and
       §5.2.
    """

    slm: SLM = field(default_factory=SLM)
    illumination: Illumination = field(default_factory=Illumination)
    relay: Relay = field(default_factory=Relay)
    eye: Eye = field(default_factory=Eye)

    def __post_init__(self) -> None:
        for name, cls in (
            ("slm", SLM),
            ("illumination", Illumination),
            ("relay", Relay),
            ("eye", Eye),
        ):
            if not isinstance(getattr(self, name), cls):
                raise ConfigError(name, getattr(self, name), f"a {cls.__name__}")
        fl = self.relay.fresnel_focal_mm
        if fl is not None:
            n_max = max(self.slm.pixels_x, self.slm.pixels_y)
            p_mm = self.slm.pitch_um * 1e-3
            f_min = n_max * p_mm**2 / self.illumination.wavelength_mm
            if abs(fl) < f_min:
                raise ConfigError(
                    "relay.fresnel_focal_mm",
                    fl,
                    f"|f| >= {f_min:.1f} mm",
                    "a shorter lens is aliased by the SLM pixels (N p² / λ)",
                )

    # -- source and losses -------------------------------------------------
    @property
    def unmodulated_fraction(self) -> float:
        """Share of the light through the pixel apertures that the SLM leaves unmodulated.

        ``(1 - m) + m z = 1 - m (1 - z)``: the polarisation the SLM does not modulate
        (``1 - m``) and the SLM's own zero-order fraction ``z`` of the rest.
        """
        m = self.illumination.modulated_share
        return (1.0 - m) + m * self.slm.zero_order_fraction

    @property
    def coherent_zero_share(self) -> float:
        """Share of the zero order's power that can interfere with the modulated light.

        ``m z (1 - s) / ((1 - m) + m z)``: only the SLM's own zero order is in the
        modulated polarisation (the other polarisation cannot interfere with it,
        Born & Wolf §10.9), and of it the share ``1 - s`` that is not incoherent
        (``slm.zero_order_incoherent_share``). 0 without a zero order.
        """
        u = self.unmodulated_fraction
        if u <= 0.0:
            return 0.0
        m = self.illumination.modulated_share
        z = self.slm.zero_order_fraction
        return min(m * z * (1.0 - self.slm.zero_order_incoherent_share) / u, 1.0)

    @property
    def optics_transmission(self) -> float:
        """SLM reflectance times relay transmission: the bench's share up to the pupil."""
        return self.slm.reflectance * self.relay.transmission

    def source_blur(self) -> SourceBlur:
        """The blur of the retinal map by the source's angular spread."""
        ill = self.illumination
        if ill.fibre_core_um is not None:
            r = fibre_blur_radius_um(
                core_diameter_um=ill.fibre_core_um,
                na=ill.fibre_na,
                beam_radius_mm=ill.waist_mm,
                effective_focal_mm=self.effective_focal_mm,
            )
            return SourceBlur("disc", r)
        if ill.m_squared > 1.0:
            sigma = gaussian_blur_sigma_um(
                wavelength_nm=ill.wavelength_nm,
                waist_mm=ill.waist_mm,
                m_squared=ill.m_squared,
                effective_focal_mm=self.effective_focal_mm,
            )
            return SourceBlur("gaussian", sigma)
        return NO_BLUR

    # -- derived scales ---------------------------------------------------
    @property
    def effective_focal_mm(self) -> float:
        """Focal length that maps SLM spatial frequency to the retina, ``f_eye / M``."""
        return self.eye.focal_length_mm / self.relay.magnification

    @property
    def field_width_x_um(self) -> float:
        """Retinal width of one diffraction order along x, ``λ f_eye / (p M)``, µm."""
        return (
            self.illumination.wavelength_mm
            * self.effective_focal_mm
            / (self.slm.pitch_um * 1e-3)
            * 1e3
        )

    @property
    def field_width_um(self) -> float:
        """Retinal width of the steerable field (square pixels: same along x and y), µm."""
        return self.field_width_x_um

    @property
    def sample_pitch_x_um(self) -> float:
        """Retinal pitch of far-field samples along x, ``λ f_eye / (N_x p M)``, µm."""
        return self.field_width_x_um / self.slm.pixels_x

    @property
    def sample_pitch_y_um(self) -> float:
        """Retinal pitch of far-field samples along y, ``λ f_eye / (N_y p M)``, µm."""
        return self.field_width_x_um / self.slm.pixels_y

    @property
    def max_steer_deg(self) -> float:
        """Largest steerable angle from the axis in the eye, degrees (``λ/(2pM)``)."""
        return math.degrees(
            self.illumination.wavelength_mm
            / (2.0 * self.slm.pitch_um * 1e-3 * self.relay.magnification)
        )

    @property
    def field_width_deg(self) -> float:
        """Width of the steerable field in degrees of visual angle."""
        return self.eye.um_to_deg(self.field_width_um)

    @property
    def beam_diameter_at_pupil_mm(self) -> float:
        """Beam diameter at the pupil, mm.

        For a Gaussian beam, ``2 w0 M`` (1/e² diameter), limited by the SLM
        diagonal; for a flat or measured beam, the SLM diagonal × ``M``.
        """
        diag = math.hypot(self.slm.width_mm, self.slm.height_mm)
        if self.illumination.profile == "gaussian":
            return min(2.0 * self.illumination.waist_mm, diag) * self.relay.magnification
        return diag * self.relay.magnification

    @property
    def overfills_pupil(self) -> bool:
        """True when the beam at the pupil is wider than the pupil."""
        return self.beam_diameter_at_pupil_mm > self.eye.pupil_diameter_mm

    def check_pupil(self) -> None:
        """Emit :class:`PupilOverfillWarning` when the beam overfills the pupil."""
        if self.overfills_pupil:
            warnings.warn(
                f"beam at the pupil is {self.beam_diameter_at_pupil_mm:.2f} mm, wider than "
                f"the {self.eye.pupil_diameter_mm:.2f} mm pupil: light is clipped",
                PupilOverfillWarning,
                stacklevel=2,
            )

    def design_grid(self) -> RetinalGrid:
        """The far-field grid the hologram controls: one sample per SLM pixel."""
        return RetinalGrid(self.slm.shape, self.sample_pitch_x_um, self.sample_pitch_y_um)

    def prediction_grid(self, oversample: int = 2) -> RetinalGrid:
        """The oversampled grid on which the retina is predicted."""
        return self.design_grid().refined(oversample)

    def pupil_mask(self) -> np.ndarray:
        """Boolean mask of SLM pixels whose image falls inside the eye's pupil."""
        x, y = self.slm.pixel_coords_mm()
        r_mm = self.eye.pupil_diameter_mm / (2.0 * self.relay.magnification)
        return (x**2 + y**2) <= r_mm**2

    def fresnel_phase_rad(self) -> np.ndarray | None:
        """Quadratic phase of the Fresnel lens term on the SLM pixels, radians, or None."""
        fl = self.relay.fresnel_focal_mm
        if fl is None:
            return None
        x, y = self.slm.pixel_coords_mm()
        phase = -math.pi / (self.illumination.wavelength_mm * fl) * (x**2 + y**2)
        return phase.astype(np.float32)

    def summary(self) -> dict[str, float | bool]:
        """Derived scales as a flat dictionary (units in the keys)."""
        return {
            "sample_pitch_x_um": self.sample_pitch_x_um,
            "sample_pitch_y_um": self.sample_pitch_y_um,
            "field_width_um": self.field_width_um,
            "field_width_deg": self.field_width_deg,
            "max_steer_deg": self.max_steer_deg,
            "beam_diameter_at_pupil_mm": self.beam_diameter_at_pupil_mm,
            "overfills_pupil": self.overfills_pupil,
            "modulated_share": self.illumination.modulated_share,
            "unmodulated_fraction": self.unmodulated_fraction,
            "optics_transmission": self.optics_transmission,
            "source_blur_rms_um": self.source_blur().rms_width_um,
        }
