"""Stimuli by kind name, for sequence files.

A sequence file names a stimulus by ``kind`` and gives its parameters as
keywords. Sizes may be given in µm, in degrees of visual angle
(``<name>_deg``, converted through the eye), or in the units a kind offers
(a grating's ``cycles_per_deg`` or ``bar_width_px``; an optotype's
``logmar``, ``mar_arcmin``, ``snellen`` or ``decimal``).
"""

from __future__ import annotations

from collections.abc import Mapping
from typing import Any

from ..errors import ConfigError
from ..optics.system import Eye
from . import compose, gratings, images, optotypes, shapes  # noqa: F401 - they register kinds
from .base import STIMULUS_KINDS, Stimulus, build_stimulus

__all__ = ["stimulus_from_dict", "stimulus_kinds", "from_dict"]


def stimulus_kinds() -> tuple[str, ...]:
    """Names of the stimulus kinds."""
    return tuple(STIMULUS_KINDS)


def stimulus_from_dict(
    kind: str,
    params: Mapping[str, Any] | None = None,
    *,
    eye: Eye | float | None = None,
    pitch_um: float | None = None,
) -> Stimulus:
    """Build a stimulus from its kind name and keyword parameters.

    Parameters
    ----------
    kind : str
        One of :func:`stimulus_kinds` (``"grating"``, ``"checkerboard"``,
        ``"landolt"``, ``"tumbling_e"``, ``"letter"``, ``"spot"``, ``"bar"``,
        ``"annulus"``, ``"flash"``, ``"blank"``, ``"image"``, and the
        compositions ``"composite"``, ``"inverted"``, ``"masked"``).
    params : mapping, optional
        Keyword parameters of that kind.
    eye : Eye or float, optional
        Needed for sizes in degrees, cycles/deg or acuity units.
    pitch_um : float, optional
        Implant pitch, needed for a grating's ``bar_width_px``.

    Returns
    -------
    Stimulus

    Raises
    ------
    ConfigError
        For an unknown kind (the message lists the kinds), an unknown
        parameter, or a bad value.

    Examples
    --------
    >>> from stimplan.optics.eye import eye_preset
    >>> s = stimulus_from_dict("landolt", {"logmar": 1.0, "orientation": "up"},
    ...                        eye=eye_preset("human"))
    >>> round(s.height_um, 1)
    240.0
    """
    return build_stimulus(kind, params, eye=eye, pitch_um=pitch_um)


def from_dict(
    data: Mapping[str, Any], *, eye: Eye | float | None = None, pitch_um: float | None = None
) -> Stimulus:
    """Inverse of :meth:`Stimulus.to_dict`: a flat mapping with a ``"kind"`` key."""
    if not isinstance(data, Mapping) or "kind" not in data:
        raise ConfigError("stimulus", data, "a table with a 'kind' key")
    rest = {k: val for k, val in data.items() if k != "kind"}
    return stimulus_from_dict(data["kind"], rest, eye=eye, pitch_um=pitch_um)
