"""Photovoltaic implant arrays: layout, rasterising and per-pixel readout.

An :class:`Implant` is a hexagonal or square lattice of pixels of a given
pitch, cut to an outline (hexagon, circle, square or rectangle), placed on
the retina with a centre offset and a rotation. Each pixel has an active
photodiode (hexagon, circle or square) inside its cell, separated from its
neighbours by a trench.

Array frame
    Before placement the array is centred on the origin. Hexagonal lattices
    have horizontal rows (neighbours at 0°, 60°, 120°, ...), row spacing
    ``pitch × √3/2``, odd rows shifted by half a pitch; their cells are
    regular hexagons with vertical flat sides, ``pitch`` across the flats.
    Square lattices have square cells of side ``pitch``.
Numbering
    Pixels are numbered ``0 .. n-1`` from the top row down and, within a row,
    from left to right, in the array frame; moving or rotating the array does
    not renumber it.
Membership
    With ``pixel_inclusion="center"`` a lattice pixel belongs to the array
    when its centre lies inside the outline; with ``"cell"`` when its whole
    cell does. The hexagonal outline has corners left and right (along x),
    ``diameter_um`` corner to corner; ``rings=k`` selects the centred
    hexagonal patch of ``3k(k+1)+1`` pixels (corner to corner
    ``(2k+1) × pitch`` with centre inclusion).
Photodiodes, threshold and view
    A pixel's current is responsivity × power / diodes in series
    (:mod:`~stimplan.implant.photodiode`; the silicon limit when no
    responsivity is known). An implant may carry a stimulation threshold
    range with its source (:mod:`~stimplan.implant.threshold`) or a
    strength–duration curve (:mod:`~stimplan.implant.strength_duration`);
    the implant's view of a stimulus sets each pixel's photodiode irradiance
    against it (:mod:`~stimplan.implant.view`).
Rasterising
    The coverage of every grid sample by every active area is computed
    exactly (analytic intersection of each polygon or disc with each sample
    square, see :func:`polygon_quadrant_area` and :func:`disc_quadrant_area`),
    so the rasterised area equals the geometric area up to rounding.

References
----------
.. [1] K. Mathieson et al., "Photovoltaic retinal prosthesis with high pixel
   density", *Nat. Photonics* 6, 391 (2012).
.. [2] D. Palanker et al., "Photovoltaic restoration of central vision in
   atrophic age-related macular degeneration", *Ophthalmology* 127, 1097
   (2020).
.. [3] H. Lorach et al., *Nat. Med.* 21, 476 (2015) (grating acuity and
   pixel pitch).
"""

from __future__ import annotations

from .geometry import (
    centred_hexagonal_number,
    disc_quadrant_area,
    polygon_quadrant_area,
    silicon_responsivity_limit_a_per_w,
)
from .layout import Implant, PixelResponse
from .photodiode import pixel_photocurrent_ua, pixel_responsivity
from .presets import IMPLANT_PRESETS, implant_names, implant_preset
from .raster import ImplantRaster, PixelReadout
from .strength_duration import StrengthDuration, lapicque_threshold, weiss_threshold
from .threshold import StimulationThreshold, stimulation_threshold
from .view import ImplantView, implant_view

__all__ = [
    "Implant",
    "ImplantRaster",
    "PixelReadout",
    "IMPLANT_PRESETS",
    "implant_preset",
    "implant_names",
    "silicon_responsivity_limit_a_per_w",
    "centred_hexagonal_number",
    "polygon_quadrant_area",
    "disc_quadrant_area",
    "PixelResponse",
    "pixel_photocurrent_ua",
    "pixel_responsivity",
    "StrengthDuration",
    "weiss_threshold",
    "lapicque_threshold",
    "StimulationThreshold",
    "stimulation_threshold",
    "ImplantView",
    "implant_view",
]
