"""The retina an export folder will produce, predicted again from the grey levels it holds.

An export keeps the grey levels sent to the SLM and the whole configuration
(``manifest.json``, ``config``). Reading the levels back through the SLM's
grey-level map and predicting the far field again shows what these files
(not the plan that wrote them) put on the retina: a check that the stack is
the one planned, and the preview a user wants when opening an export.

References
----------
.. [1] J. W. Goodman, *Introduction to Fourier Optics*, 3rd ed. (2005), §4.2
   (Fraunhofer propagation of the SLM field).
"""

from __future__ import annotations

from dataclasses import dataclass, replace

import numpy as np

from ..errors import ConfigError
from ..holography.propagation import predict_from_levels
from ..holography.quantize import grey_map_for
from ..plan import REFERENCE_POWER_MW
from ..sequence import sequence_from_dict

__all__ = ["ReplayedExport", "replay_export"]


@dataclass(frozen=True, eq=False)
class ReplayedExport:
    """An export's holograms predicted again on the retina.

    Attributes
    ----------
    spec : SequenceSpec
        The configuration the export was made with.
    predictions : list of RetinalPrediction
        One per hologram page, at :data:`~stimplan.plan.REFERENCE_POWER_MW`.
    frame_pages : list of int
        Each frame's hologram page, -1 for a dark pause.
    frame_scale : list of float
        Each frame's laser power over the reference power (0 for a pause).
    """

    spec: object
    predictions: list
    frame_pages: list[int]
    frame_scale: list[float]


def replay_export(bundle, *, workers: int = -1) -> ReplayedExport:
    """Predict the retina of every hologram page of an export folder read back.

    Parameters
    ----------
    bundle : ExportBundle
        From :func:`~stimplan.present.export.load_export` (checksums verified).
    workers : int
        FFT workers (``scipy.fft``; -1 for all cores).

    Returns
    -------
    ReplayedExport

    Raises
    ------
    ConfigError
        If the manifest has no configuration, or its grey levels are not the
        SLM's.
    SequenceError
        If the configuration no longer validates (for instance, a lookup
        table file it names has moved).
    """
    config = bundle.manifest.get("config")
    if not isinstance(config, dict):
        raise ConfigError("manifest.config", type(config).__name__, "the export's configuration")
    spec = sequence_from_dict(config)
    system = spec.system
    system = replace(system, illumination=replace(system.illumination, power_mw=REFERENCE_POWER_MW))
    lut = grey_map_for(system.slm)
    grey = np.asarray(bundle.grey)
    if grey.ndim != 3 or grey.shape[1:] != system.slm.shape:
        raise ConfigError(
            "holograms.tif", grey.shape, f"pages of the SLM's {system.slm.shape} pixels"
        )
    predictions = [
        predict_from_levels(
            lut.levels_from_grey(page), system, oversample=spec.oversample, workers=workers
        )
        for page in grey
    ]
    pages, scale = [], []
    for row in bundle.timeline:
        k = int(row.get("hologram_index", -1))
        power = float(row.get("power_mw") or 0.0)
        lit = 0 <= k < len(predictions) and power > 0
        pages.append(k if lit else -1)
        scale.append(power / REFERENCE_POWER_MW if lit else 0.0)
    return ReplayedExport(spec, predictions, pages, scale)
