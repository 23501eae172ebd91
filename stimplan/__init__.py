"""stimplan: plan phase-hologram light stimuli for photovoltaic retinal implants.

The physics flows one way: optical system and target -> hologram ->
predicted retina -> implant readout -> amplitude-mask comparison -> exposure
assessment. Nothing here imports Qt or napari.
"""

from .errors import ConfigError, ExposureLimitError, InputFileError, StimplanError
from .grid import RetinalGrid
from .optics.system import SLM, Eye, Illumination, OpticalSystem, Relay

__version__ = "0.1.0"

__all__ = [
    "SLM",
    "ConfigError",
    "ExposureLimitError",
    "Eye",
    "Illumination",
    "InputFileError",
    "OpticalSystem",
    "Relay",
    "RetinalGrid",
    "StimplanError",
    "__version__",
]
