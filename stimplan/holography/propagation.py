"""From SLM field to retinal irradiance.

The eye's optics form the Fraunhofer pattern of the field at the pupil, which
is the relayed SLM field. With the unitary ("ortho") discrete Fourier
transform the power of the SLM plane equals the power of the far field
(Parseval), so far-field samples are powers in mW when the SLM field is in
sqrt(mW) per pixel.

The *prediction* is more than the far field at the sample points that the
hologram design controls:

* the SLM field is zero-padded by an oversampling factor ``s >= 2`` so that
  speckle between the design samples is seen;
* the pixel aperture multiplies the far field by ``sinc²`` (fill factor), and
  light outside one diffraction order goes to higher orders;
* the phase is the quantised, realised phase of the SLM's levels, smoothed
  across pixel edges by the fringing field when ``slm.fringing_um > 0``
  (:mod:`stimplan.holography.crosstalk`);
* the unmodulated fraction forms the zero-order spot as the beam really
  focuses (defocused when a Fresnel lens term is used);
* the polarisation the SLM does not modulate goes to the zero order with
  the SLM's own unmodulated fraction;
* the SLM reflects ``reflectance`` of the light on its pixels and the relay
  passes ``transmission`` of it;
* a source that is not a single transverse mode blurs the map by its angular
  spread (:mod:`stimplan.holography.source_blur`);
* the eye's pupil clips the relayed beam and the ocular media absorb
  ``1 - transmission``.

Every milliwatt is accounted for in :class:`PowerAccount`.

References
----------
.. [1] J. W. Goodman, *Introduction to Fourier Optics*, 3rd ed. (2005),
   §4.2 (Fraunhofer diffraction, rectangular aperture) and §5.2.
.. [2] M. Born and E. Wolf, *Principles of Optics*, 7th ed., §8.5.2.
"""

from __future__ import annotations

import threading
from dataclasses import dataclass, field, replace
from functools import lru_cache

import numpy as np
import scipy.fft as sfft

from .. import validate
from ..errors import ConfigError
from ..grid import RetinalGrid
from ..optics.source import NO_BLUR
from . import kernels
from .crosstalk import fringed_far_power
from .kernels import gather_scaled
from .quantize import grey_map_for
from .source_blur import blur_power_map

__all__ = [
    "far_field",
    "near_field",
    "pad_centered",
    "pixel_aperture_envelope",
    "pixel_aperture_axes",
    "PowerAccount",
    "RetinalPrediction",
    "predict_retina",
    "predict_from_levels",
    "zero_order_irradiance",
]


def far_field(slm_field: np.ndarray, *, workers: int = -1) -> np.ndarray:
    """Centred, unitary 2-D DFT of an SLM-plane field.

    Parameters
    ----------
    slm_field : ndarray, complex
        Field on the SLM grid, sqrt(mW) per pixel.
    workers : int
        Threads for :func:`scipy.fft.fft2` (-1: all cores).

    Returns
    -------
    ndarray, complex64
        Far field with zero frequency at ``[rows // 2, cols // 2]``;
        ``sum(|F|**2) == sum(|E|**2)``.

    References
    ----------
    .. [1] Goodman (2005), §4.2 and §5.2; Parseval's theorem, §2.1.
    """
    e = np.asarray(slm_field)
    if e.ndim != 2:
        raise ConfigError("slm_field", e, "a 2-D array")
    e = e.astype(np.complex64, copy=False)
    out = sfft.fft2(sfft.ifftshift(e), norm="ortho", workers=workers, overwrite_x=True)
    return sfft.fftshift(out)


def near_field(far: np.ndarray, *, workers: int = -1) -> np.ndarray:
    """Inverse of :func:`far_field` (centred, unitary).

    References
    ----------
    .. [1] J. W. Goodman, *Introduction to Fourier Optics*, 3rd ed. (2005), §2.1 (unitary DFT,
       Parseval).
    """
    f = np.asarray(far).astype(np.complex64, copy=False)
    out = sfft.ifft2(sfft.ifftshift(f), norm="ortho", workers=workers, overwrite_x=True)
    return sfft.fftshift(out)


def pad_centered(a: np.ndarray, shape: tuple[int, int]) -> np.ndarray:
    """Embed ``a`` in a zero array of ``shape`` so that centre sample maps to centre sample."""
    out = np.zeros(shape, dtype=a.dtype)
    r0 = shape[0] // 2 - a.shape[0] // 2
    c0 = shape[1] // 2 - a.shape[1] // 2
    out[r0 : r0 + a.shape[0], c0 : c0 + a.shape[1]] = a
    return out


def pixel_aperture_envelope(
    shape: tuple[int, int], samples_per_order: tuple[int, int], aperture_fraction: float
) -> np.ndarray:
    """Far-field intensity envelope of a square pixel aperture.

    A pixel of pitch ``p`` whose aperture is ``a = f p`` wide multiplies the
    far field by ``sinc²(a u_x) sinc²(a u_y)``. On a far-field grid with
    ``samples_per_order`` samples across one diffraction order (``1/p``),
    sample ``k`` from the centre has ``a u = f k / samples_per_order``.

    Parameters
    ----------
    shape : tuple of int
        ``(rows, cols)`` of the far-field grid.
    samples_per_order : tuple of int
        Samples across one order along rows and columns (``s N``).
    aperture_fraction : float
        Linear aperture fraction ``a/p``, in (0, 1] (``sqrt(fill_factor)``).

    Returns
    -------
    ndarray, float32, shape ``shape``
        ``sinc²`` envelope, 1 at the centre.

    References
    ----------
    .. [1] Goodman (2005), §4.2.2, eq. (4-28): Fraunhofer pattern of a
       rectangular aperture.
    """
    ey, ex = pixel_aperture_axes(shape, samples_per_order, aperture_fraction, dtype=np.float64)
    return (ey[:, np.newaxis] * ex[np.newaxis, :]).astype(np.float32)


def pixel_aperture_axes(
    shape: tuple[int, int],
    samples_per_order: tuple[int, int],
    aperture_fraction: float,
    *,
    dtype=np.float32,
) -> tuple[np.ndarray, np.ndarray]:
    """The two 1-D factors ``(rows, cols)`` of :func:`pixel_aperture_envelope`.

    The envelope of a rectangular aperture is separable, so a kernel can
    weight a plane by ``ey[k] * ex[l]`` without forming the 2-D envelope.

    References
    ----------
    .. [1] Goodman (2005), §4.2.2, eq. (4-28).
    """
    f = validate.number("aperture_fraction", aperture_fraction, lo=0, hi=1, lo_open=True)
    ky = (np.arange(shape[0]) - shape[0] // 2) / samples_per_order[0]
    kx = (np.arange(shape[1]) - shape[1] // 2) / samples_per_order[1]
    return (np.sinc(f * ky) ** 2).astype(dtype), (np.sinc(f * kx) ** 2).astype(dtype)


@dataclass(frozen=True)
class PowerAccount:
    """Where the laser power goes, mW. The entries sum to ``input_mw``.

    Attributes
    ----------
    input_mw : float
        Laser power on the SLM.
    pixel_gaps_mw : float
        Light on the inactive space between SLM pixels, ``(1 - fill_factor)``.
    slm_absorbed_mw : float
        Light on the pixel apertures that the SLM does not reflect,
        ``(1 - reflectance)``.
    relay_lost_mw : float
        Light leaving the SLM that the relay does not pass,
        ``(1 - relay transmission)``.
    pupil_clipped_mw : float
        Light whose relayed image falls outside the eye's pupil.
    higher_orders_mw : float
        Light diffracted by the pixel grid outside the central order (it
        does not reach the predicted field), with what the fringing fields
        diffract there.
    ocular_absorbed_mw : float
        Light of the central order absorbed by the ocular media.
    zero_order_mw : float
        Unmodulated light reaching the retina (the zero-order spot).
    field_mw : float
        Modulated light reaching the retina.
    signal_mw : float or None
        The part of ``field_mw`` inside the signal region, if one was given.
    slm_absorbed_mw, relay_lost_mw : float
        See above (0 for an ideal SLM and relay).
    cross_polarised_mw : float
        The part of ``zero_order_mw`` that is the polarisation the SLM does
        not modulate (not an entry of the sum: it is inside ``zero_order_mw``).
    crosstalk_mw : float or None
        Signal light that the fringing fields (``slm.fringing_um``) move out of
        the signal region: the ideal SLM's ``signal_mw`` less this one's (not an
        entry of the sum: the light is in ``field_mw`` outside the signal, the
        zero order and ghosts included, or in ``higher_orders_mw``). None
        without fringing or without a signal region.
    """

    input_mw: float
    pixel_gaps_mw: float
    pupil_clipped_mw: float
    higher_orders_mw: float
    ocular_absorbed_mw: float
    zero_order_mw: float
    field_mw: float
    signal_mw: float | None = None
    slm_absorbed_mw: float = 0.0
    relay_lost_mw: float = 0.0
    cross_polarised_mw: float = 0.0
    crosstalk_mw: float | None = None

    @property
    def elsewhere_mw(self) -> float | None:
        """Modulated light on the retina outside the signal region."""
        return None if self.signal_mw is None else self.field_mw - self.signal_mw

    @property
    def retina_mw(self) -> float:
        """All light reaching the predicted retinal field."""
        return self.zero_order_mw + self.field_mw

    def total_mw(self) -> float:
        """Sum of all destinations; equals ``input_mw``."""
        return (
            self.pixel_gaps_mw
            + self.slm_absorbed_mw
            + self.relay_lost_mw
            + self.pupil_clipped_mw
            + self.higher_orders_mw
            + self.ocular_absorbed_mw
            + self.zero_order_mw
            + self.field_mw
        )

    def scaled(self, factor: float) -> PowerAccount:
        """The same account at ``factor`` times the laser power."""
        kw = {k: (None if val is None else val * factor) for k, val in self.__dict__.items()}
        return PowerAccount(**kw)

    def as_dict(self) -> dict[str, float | None]:
        d = dict(self.__dict__)
        d["elsewhere_mw"] = self.elsewhere_mw
        return d


@dataclass(frozen=True)
class RetinalPrediction:
    """The predicted irradiance on the retina.

    Attributes
    ----------
    irradiance_mw_per_mm2 : ndarray, float32
        Retinal irradiance on ``grid`` (after the ocular media), mW/mm².
    grid : RetinalGrid
        The oversampled retinal grid.
    account : PowerAccount
        Where the laser power went.
    oversample : int
        Oversampling factor relative to the design grid.
    zero_order_um : tuple of float
        Retinal ``(x, y)`` of the zero order, µm.
    """

    irradiance_mw_per_mm2: np.ndarray
    grid: RetinalGrid
    account: PowerAccount
    oversample: int
    zero_order_um: tuple[float, float] = (0.0, 0.0)
    notes: tuple[str, ...] = field(default=())

    @property
    def power_mw(self) -> float:
        """Laser power on the SLM that this prediction is for."""
        return self.account.input_mw

    @property
    def sample_power_mw(self) -> np.ndarray:
        """Power per grid sample, mW (float32)."""
        return self.irradiance_mw_per_mm2 * np.float32(self.grid.sample_area_mm2)

    def scaled_to(self, power_mw: float) -> RetinalPrediction:
        """The same prediction at another laser power (the optics are linear)."""
        p = validate.number("power_mw", power_mw, lo=0, lo_open=True)
        k = p / self.power_mw
        return replace(
            self,
            irradiance_mw_per_mm2=(self.irradiance_mw_per_mm2 * np.float32(k)),
            account=self.account.scaled(k),
        )


def _beam_on_slm(system) -> tuple[np.ndarray, np.ndarray, float]:
    """Beam amplitude (float32), pupil mask (float32 0/1) and beam power inside the pupil
    (mW) on the SLM pixels; kept for the last two systems with an analytic beam."""
    if system.illumination.profile == "file":  # the file may change between calls
        return _beam_uncached(system)
    return _beam_cached(system)


def _beam_uncached(system) -> tuple[np.ndarray, np.ndarray, float]:
    amp = system.illumination.amplitude(system.slm)
    pupil = system.pupil_mask().astype(np.float32)
    inside = float(np.sum(amp.astype(np.float64) ** 2 * pupil))
    amp.setflags(write=False)
    pupil.setflags(write=False)
    return amp, pupil, inside


_beam_cached = lru_cache(maxsize=2)(_beam_uncached)

_SCRATCH = threading.local()
#: Work planes up to this size are kept per thread (a 1024² SLM, 2x padded: 32 MiB).
_SCRATCH_MAX_BYTES = 64 * 2**20


def _scratch(shape: tuple[int, int]) -> np.ndarray:
    """A complex64 work plane of ``shape`` (its contents are garbage), kept per thread
    when it is small enough to hold on to."""
    buf = getattr(_SCRATCH, "plane", None)
    if buf is not None and buf.shape == shape:
        return buf
    buf = np.empty(shape, dtype=np.complex64)
    _SCRATCH.plane = buf if buf.nbytes <= _SCRATCH_MAX_BYTES else None
    return buf


def _far_power(
    amplitude: np.ndarray,
    phase_rad: np.ndarray | None,
    pupil: np.ndarray | None,
    padded_shape: tuple[int, int],
    weight_rows: np.ndarray,
    weight_cols: np.ndarray,
    scale: float,
    workers: int,
) -> np.ndarray:
    """``|far_field(pad_centered(amplitude exp(i phase) pupil))|² * weight * scale`` (float32),
    ``weight = outer(weight_rows, weight_cols)``, with the shifts folded into two fused
    passes around one in-place FFT on a per-thread work plane."""
    kern = kernels.SERIAL if workers == 1 else kernels.PARALLEL
    amp = np.ascontiguousarray(amplitude, dtype=np.float32)
    ph = np.zeros_like(amp) if phase_rad is None else np.ascontiguousarray(phase_rad, np.float32)
    pu = np.ones_like(amp) if pupil is None else np.ascontiguousarray(pupil, dtype=np.float32)
    buf = _scratch(tuple(padded_shape))
    kern.slm_field_shifted(amp, ph, pu, buf)
    spec = sfft.fft2(buf, norm="ortho", workers=workers, overwrite_x=True)
    out = np.empty(padded_shape, dtype=np.float32)
    wr = np.ascontiguousarray(weight_rows, dtype=np.float32)
    wc = np.ascontiguousarray(weight_cols, dtype=np.float32)
    kern.shifted_power(spec, wr, wc, np.float32(scale), out)
    return out


def predict_retina(
    displayed_phase_rad: np.ndarray,
    system,
    *,
    oversample: int = 2,
    signal_region: np.ndarray | None = None,
    focus_error_rad: np.ndarray | None = None,
    source_blur: bool = True,
    workers: int = -1,
) -> RetinalPrediction:
    """Predict retinal irradiance for a phase pattern shown on the SLM.

    Parameters
    ----------
    displayed_phase_rad : ndarray, shape ``system.slm.shape``
        The phase the SLM really shows, radians (the realised phase of the
        quantised levels, with the Fresnel lens and correction terms that were
        added to the hologram).
    system : OpticalSystem
        The optics. The aberration the correction phase was measured for is
        taken as exactly ``-correction``, and the relay is taken as refocused
        for the Fresnel lens term, so both cancel for the modulated light;
        the unmodulated light keeps the aberration and the defocus.
    oversample : int
        Zero-padding factor, >= 2.
    signal_region : ndarray, optional
        Weights in [0, 1] on the prediction grid (area coverage of the signal
        region); when given, ``account.signal_mw`` is filled in.
    focus_error_rad : ndarray, optional
        Phase of a focusing error of the eye on the SLM pixels (radians, from
        :func:`stimplan.optics.aberration.focus_error_phase_rad`), applied to
        the modulated and the unmodulated light alike.
    source_blur : bool
        Blur the map by the source's angular spread (``False``: the map of a
        single-mode source, whose disc powers bound the blurred map's from
        above; the exposure estimate uses it).
    workers : int
        Threads for the FFT.

    Returns
    -------
    RetinalPrediction

    Notes
    -----
    The modulated and the unmodulated light are added in intensity: the mean
    over their relative phase, which is not known (and which flicker
    averages out). Intensity addition keeps the power account exact. Where
    the zero order is coherent with the signal, the irradiance at a place
    can reach ``(sqrt(I_mod) + sqrt(I_zero))²``; the exposure estimate uses
    that bound (:func:`stimplan.holography.zero_order.coherent_zero_order_bound`).

    References
    ----------
    .. [1] Goodman (2005), §4.2 (Fraunhofer diffraction), §4.2.2 (pixel
       aperture, eq. 4-28).
    .. [2] Parseval's theorem for the unitary DFT (Goodman, §2.1).
    """
    slm = system.slm
    s = validate.integer("oversample", oversample, lo=2, hi=16)
    phase = validate.finite_array("hologram.phase_rad", displayed_phase_rad, shape=slm.shape)
    system.check_pupil()
    amp, pupil, beam_in_pupil_mw = _beam_on_slm(system)
    p_in = float(system.illumination.power_mw)
    ff = slm.fill_factor
    z = system.unmodulated_fraction  # the SLM's zero order and the other polarisation
    refl, relay_t = slm.reflectance, system.relay.transmission
    rt = refl * relay_t
    tau = system.eye.transmission
    p_apert = ff * p_in
    p_pupil = ff * beam_in_pupil_mw
    clipped = max(p_apert - p_pupil, 0.0)  # float rounding can leave -1e-9
    p_pupil = p_apert - clipped
    blur = system.source_blur() if source_blur else NO_BLUR

    grid = system.prediction_grid(s)
    padded = grid.shape
    env_r, env_c = _envelope_axes(system, padded)

    lens = system.fresnel_phase_rad()
    corr = system.illumination.correction_phase_rad(slm)
    err = None
    if focus_error_rad is not None:
        err = validate.finite_array("focus_error_rad", focus_error_rad, shape=slm.shape)
    mod_phase = phase
    if lens is not None:
        mod_phase = mod_phase - lens
    if corr is not None:
        mod_phase = mod_phase - corr
    if err is not None:
        mod_phase = mod_phase + err
    region = None
    if signal_region is not None:
        region = validate.finite_array("signal_region", signal_region, shape=padded, lo=0, hi=1)
        region = np.ascontiguousarray(region, dtype=np.float32).reshape(-1)
    ideal_signal = None
    if slm.fringing_um > 0:
        if region is not None:  # the ideal SLM's signal, for the account's crosstalk line
            ideal = _far_power(amp, mod_phase, pupil, padded, env_r, env_c, (1.0 - z) * rt, workers)
            ideal = blur_power_map(ideal, grid, blur, workers=workers)
            ideal_signal = float(np.dot(ideal.reshape(-1).astype(np.float64), region))
            del ideal
        power_mod = fringed_far_power(
            amp,
            phase,
            None if mod_phase is phase else mod_phase - phase,
            pupil,
            padded,
            fringing_px=slm.fringing_um / slm.pitch_um,
            samples_per_pixel=slm.fringing_samples_per_pixel,
            fill_factor=ff,
            scale=(1.0 - z) * rt,
            workers=workers,
        )
    else:
        power_mod = _far_power(amp, mod_phase, pupil, padded, env_r, env_c, (1.0 - z) * rt, workers)
    power_mod = blur_power_map(power_mod, grid, blur, workers=workers)
    kern = kernels.SERIAL if workers == 1 else kernels.PARALLEL
    no_region = np.zeros(1, np.float32)
    tau32 = np.float32(tau)
    inv_area = np.float32(1.0 / grid.sample_area_mm2)

    zero_pre = 0.0
    if z > 0:
        power_zero = _unmodulated_power(system, grid, env_r, env_c, err, blur, workers)
        zero_pre = float(power_zero.sum(dtype=np.float64))
        field_mw_pre, signal_pre = (
            kern.sums_and_scale(power_mod.reshape(-1), region, True, np.float32(1), np.float32(1))
            if region is not None
            else (float(power_mod.sum(dtype=np.float64)), 0.0)
        )
        power_zero += power_mod
        irr = power_zero
        kern.sums_and_scale(irr.reshape(-1), no_region, False, tau32, inv_area)
    else:  # the sums and the scaling to irradiance in one pass
        use = region is not None
        field_mw_pre, signal_pre = kern.sums_and_scale(
            power_mod.reshape(-1), region if use else no_region, use, tau32, inv_area
        )
        irr = power_mod
    central = field_mw_pre + zero_pre
    higher = rt * p_pupil - central
    signal = None if region is None else tau * float(signal_pre)
    cross = 1.0 - system.illumination.modulated_share  # of the light, all unmodulated
    account = PowerAccount(
        input_mw=p_in,
        pixel_gaps_mw=(1.0 - ff) * p_in,
        pupil_clipped_mw=rt * clipped,
        higher_orders_mw=higher,
        ocular_absorbed_mw=(1.0 - tau) * central,
        zero_order_mw=tau * zero_pre,
        field_mw=tau * field_mw_pre,
        signal_mw=signal,
        slm_absorbed_mw=(1.0 - refl) * p_apert,
        relay_lost_mw=refl * (1.0 - relay_t) * p_apert,
        cross_polarised_mw=tau * zero_pre * (cross / z if z > 0 else 0.0),
        crosstalk_mw=None if ideal_signal is None else tau * (ideal_signal - float(signal_pre)),
    )
    return RetinalPrediction(irr, grid, account, s, (0.0, 0.0), _notes(system, blur))


def _envelope_axes(system, padded: tuple[int, int]) -> tuple[np.ndarray, np.ndarray]:
    """The separable pixel envelope of the prediction grid, the rows' axis carrying ff²."""
    ff = system.slm.fill_factor
    env_r, env_c = pixel_aperture_axes(padded, padded, float(np.sqrt(ff)))
    # bin power = ff² · env · |C_k|² for a field whose |c_n|² is the power on cell n
    env_r *= np.float32(ff * ff)
    return env_r, env_c


def _unmodulated_power(system, grid, env_r, env_c, err, blur, workers) -> np.ndarray:
    """Far-field power (mW per sample, float32) of the light the SLM leaves unmodulated: the
    beam as it focuses with the lens, correction and focus-error terms it does not cancel."""
    slm = system.slm
    lens = system.fresnel_phase_rad()
    corr = system.illumination.correction_phase_rad(slm)
    zphase = None
    if lens is not None or corr is not None or err is not None:
        zphase = np.zeros(slm.shape, np.float32)
        if lens is not None:
            zphase -= lens
        if corr is not None:
            zphase -= corr
        if err is not None:
            zphase += err
    amp, pupil, _ = _beam_on_slm(system)
    scale = system.unmodulated_fraction * system.optics_transmission
    power = _far_power(amp, zphase, pupil, grid.shape, env_r, env_c, scale, workers)
    return blur_power_map(power, grid, blur, workers=workers)


def zero_order_irradiance(
    system, *, oversample: int = 2, source_blur: bool = True, workers: int = -1
) -> np.ndarray | None:
    """The retinal irradiance (mW/mm², float32) of the unmodulated light alone, or None.

    The same map as the zero order's part of :func:`predict_retina` (it does
    not depend on the hologram): the beam through the pupil, with the
    Fresnel lens and correction terms that only the modulated light cancels,
    the pixel envelope, the ocular transmission. None when the SLM leaves no
    light unmodulated.

    References
    ----------
    .. [1] Goodman (2005), §4.2 and §4.2.2 (eq. 4-28).
    """
    if system.unmodulated_fraction <= 0:
        return None
    s = validate.integer("oversample", oversample, lo=2, hi=16)
    grid = system.prediction_grid(s)
    env_r, env_c = _envelope_axes(system, grid.shape)
    blur = system.source_blur() if source_blur else NO_BLUR
    power = _unmodulated_power(system, grid, env_r, env_c, None, blur, workers)
    kern = kernels.SERIAL if workers == 1 else kernels.PARALLEL
    tau32 = np.float32(system.eye.transmission)
    inv_area = np.float32(1.0 / grid.sample_area_mm2)
    kern.sums_and_scale(power.reshape(-1), np.zeros(1, np.float32), False, tau32, inv_area)
    return power


def _notes(system, blur) -> tuple[str, ...]:
    """What the prediction says about the beam, the polarisation and the source."""
    notes = []
    if system.overfills_pupil:
        notes.append("beam overfills the pupil: light clipped")
    share = system.illumination.modulated_share
    if share < 1.0:
        notes.append(
            f"{1.0 - share:.1%} of the light is in the polarisation the SLM does not "
            "modulate: it goes to the zero order"
        )
    if system.slm.fringing_um > 0:
        notes.append(
            f"fringing fields of {system.slm.fringing_um:g} µm at each pixel edge smooth the "
            f"phase ({system.slm.fringing_samples_per_pixel}² sub-pixel samples per pixel)"
        )
    if blur.active:
        notes.append(
            f"the retinal map is blurred by the source's angular spread ({blur.describe()}); "
            "the same map without the blur bounds its disc powers from above"
        )
    return tuple(notes)


def predict_from_levels(level_index: np.ndarray, system, **kwargs) -> RetinalPrediction:
    """Predict the retina from an image of SLM level indices (see :func:`predict_retina`).

    References
    ----------
    .. [1] J. W. Goodman, *Introduction to Fourier Optics*, 3rd ed. (2005), §4.2 and §7.2 (phase
       levels of an SLM).
    """

    lut = grey_map_for(system.slm)
    levels = np.asarray(level_index)
    if levels.shape != system.slm.shape:
        raise ConfigError("hologram.levels", levels, f"an array of shape {system.slm.shape}")
    if levels.size and (levels.min() < 0 or levels.max() >= lut.levels):
        raise ConfigError("hologram.levels", int(levels.max()), f"in [0, {lut.levels - 1}]")
    return predict_retina(lut.phase_of_levels(levels), system, **kwargs)


def with_higher_orders(
    irradiance_mw_per_mm2: np.ndarray, grid: RetinalGrid, fill_factor: float, margin_samples: int
) -> tuple[np.ndarray, RetinalGrid]:
    """The predicted map extended by the neighbouring diffraction orders of the pixel grid.

    The far field of a pixelated SLM is ``|C(u)|² sinc²(a u)``: ``|C|²`` is
    periodic with one order (the predicted grid) as its period, and the
    pixel-aperture envelope ``sinc²`` falls off across the orders. So the light
    beyond the predicted field is the predicted map, wrapped around, times the
    ratio of the envelope at the new place to the envelope at the old one. It
    lands on the retina next to the pattern, and an exposure evaluation near
    the field's edge must see it.

    Parameters
    ----------
    irradiance_mw_per_mm2 : ndarray
        Prediction on ``grid`` (one full order, zero order at the centre sample).
    grid : RetinalGrid
        The prediction grid.
    fill_factor : float
        SLM fill factor (the envelope is ``sinc²(sqrt(ff) k / n)``).
    margin_samples : int
        Samples added on every side, at most one order (``grid.rows``, ``grid.cols``).

    Returns
    -------
    ndarray, float32
        The extended map.
    RetinalGrid
        Its grid (same pitch, same centre).

    References
    ----------
    .. [1] J. W. Goodman, *Introduction to Fourier Optics*, 3rd ed. (2005),
       §4.2.2, eq. (4-28), and the periodicity of the DFT (§2.1).
    """
    f = float(np.sqrt(validate.number("slm.fill_factor", fill_factor, lo=0, hi=1, lo_open=True)))
    rows, cols = grid.shape
    m = validate.integer("margin_samples", margin_samples, lo=0, hi=min(rows, cols))
    if m == 0:
        return irradiance_mw_per_mm2, grid

    def axis(n: int) -> tuple[np.ndarray, np.ndarray]:
        k = np.arange(n + 2 * m) - (n + 2 * m) // 2  # offset from the zero order
        wrapped = (k + n // 2) % n - n // 2
        ratio = (np.sinc(f * k / n) / np.sinc(f * wrapped / n)) ** 2
        return wrapped + n // 2, ratio.astype(np.float32)

    src_r, ratio_r = axis(rows)
    src_c, ratio_c = axis(cols)
    ext = np.empty((rows + 2 * m, cols + 2 * m), dtype=np.float32)
    src = np.ascontiguousarray(irradiance_mw_per_mm2, dtype=np.float32)
    gather_scaled(src, src_r.astype(np.int64), src_c.astype(np.int64), ratio_r, ratio_c, ext)
    ext_grid = RetinalGrid((rows + 2 * m, cols + 2 * m), grid.pitch_x_um, grid.pitch_y_um)
    return ext.astype(np.float32, copy=False), ext_grid
