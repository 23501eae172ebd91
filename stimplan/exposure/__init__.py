"""Retinal exposure limits of the laser-safety standards, applied to a planned stimulus.

The package follows the data flow, one idea per module:

* :mod:`.factors` - correction factors and breakpoints, and the supported range
  (700-1200 nm, 1 ns to 3e4 s; other regimes are refused);
* :mod:`.mpe` - the retinal thermal MPE at the cornea, the lower of two editions;
* :mod:`.retina` - cornea <-> retina through a reference eye (tau cancels);
* :mod:`.pulses` - pulse timelines and the three rules for repeated exposure;
* :mod:`.discs` - power within acceptance discs on a predicted retina;
* :mod:`.frames` - frames, the maps they show, and the protocol cap;
* :mod:`.assess` - a whole sequence, bounded over centres and acceptance angles;
* :mod:`.power` - laser power for a target irradiance and the largest safe power.

Every figure is an estimate for planning, not a safety approval: it travels
with :data:`stimplan.cautions.CAUTIONS`.
"""

from ..cautions import CAUTION_SHORT, CAUTIONS, EDITION, EDITION_SHORT
from .assess import (
    AngleResult,
    ExposureAssessment,
    assess_sequence,
    default_acceptance_angles_mrad,
    evaluate_map,
)
from .discs import disc_power_map, max_disc_power
from .factors import (
    ALPHA_MAX_MRAD,
    ALPHA_MIN_MRAD,
    DURATION_MAX_S,
    DURATION_MIN_S,
    WAVELENGTH_MAX_NM,
    WAVELENGTH_MIN_NM,
    c_a,
    c_c,
    c_e,
    c_p,
    check_wavelength,
    grouping_times_s,
    t2_s,
)
from .frames import Frame, ProtocolCap, ProtocolResult
from .mpe import CornealMPE, corneal_mpe, thermal_limit_j_per_m2
from .power import PerMilliwatt, PowerComparison, PowerPlan, compare_power, plan_power
from .pulses import RULES, Pulse, RuleResult, TrainAssessment, evaluate_train, periodic_pulses
from .retina import (
    HUMAN_EYE,
    HUMAN_FOCAL_LENGTH_MM,
    LIMITING_APERTURE_AREA_M2,
    LIMITING_APERTURE_MM,
    EyeModel,
    power_into_eye_mw,
    retinal_image_diameter_um,
    retinal_irradiance_mw_per_mm2,
)

__all__ = [
    "EDITION",
    "EDITION_SHORT",
    "CAUTIONS",
    "CAUTION_SHORT",
    "WAVELENGTH_MIN_NM",
    "WAVELENGTH_MAX_NM",
    "DURATION_MIN_S",
    "DURATION_MAX_S",
    "ALPHA_MIN_MRAD",
    "ALPHA_MAX_MRAD",
    "LIMITING_APERTURE_MM",
    "LIMITING_APERTURE_AREA_M2",
    "HUMAN_FOCAL_LENGTH_MM",
    "RULES",
    "EyeModel",
    "HUMAN_EYE",
    "c_a",
    "c_c",
    "c_e",
    "t2_s",
    "grouping_times_s",
    "c_p",
    "check_wavelength",
    "thermal_limit_j_per_m2",
    "CornealMPE",
    "corneal_mpe",
    "retinal_image_diameter_um",
    "power_into_eye_mw",
    "retinal_irradiance_mw_per_mm2",
    "Pulse",
    "periodic_pulses",
    "RuleResult",
    "TrainAssessment",
    "evaluate_train",
    "disc_power_map",
    "max_disc_power",
    "default_acceptance_angles_mrad",
    "Frame",
    "ProtocolCap",
    "ProtocolResult",
    "AngleResult",
    "ExposureAssessment",
    "assess_sequence",
    "evaluate_map",
    "PerMilliwatt",
    "PowerPlan",
    "PowerComparison",
    "plan_power",
    "compare_power",
]
