"""The bench up to the retina: SLM, illumination, relay and eye, and far-field targets.

* :mod:`stimplan.optics.system` - the optical system as validated dataclasses;
  every derived scale in one place.
* :mod:`stimplan.optics.eye` - eye presets with their sources.
* :mod:`stimplan.optics.target` - target intensity with signal, dark and free
  (MRAF) regions on the far-field grid.

This is the lowest stage of the flow: it imports only the retinal grid,
validators, errors and image reading.
"""

from .system import SLM, Eye, Illumination, OpticalSystem, Relay

__all__ = ["SLM", "Eye", "Illumination", "OpticalSystem", "Relay"]
