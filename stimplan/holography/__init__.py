"""Hologram computation: propagation, IFTA and quantisation."""

from .design import Hologram, add_phase_ramp, design_hologram, linear_phase_ramp
from .ifta import METHODS, IftaResult, IftaSettings, run_ifta
from .propagation import (
    PowerAccount,
    RetinalPrediction,
    far_field,
    near_field,
    pixel_aperture_envelope,
    predict_from_levels,
    predict_retina,
)
from .quantize import GreyLevelMap, grey_map_for, quantize_phase

__all__ = [
    "METHODS",
    "GreyLevelMap",
    "Hologram",
    "IftaResult",
    "IftaSettings",
    "PowerAccount",
    "RetinalPrediction",
    "design_hologram",
    "far_field",
    "grey_map_for",
    "linear_phase_ramp",
    "add_phase_ramp",
    "near_field",
    "pixel_aperture_envelope",
    "predict_from_levels",
    "predict_retina",
    "quantize_phase",
    "run_ifta",
]
