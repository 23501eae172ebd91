"""napari plugin of stimplan: preview, review and sequence holographic stimuli.

The plugin is a thin layer: every computation is a call into ``stimplan``.

Contributions (``napari.yaml``)
    Panels: *Stimulus and hologram* (:class:`~stimplan_napari._widgets.StimulusPanel`),
    *Sequence* (:class:`~stimplan_napari._widgets.SequencePanel`), *Exposure and
    efficiency* (:class:`~stimplan_napari._readout_panel.ReadoutPanel`). Readers: stimplan
    sequence files (``*.toml``) and export folders (or their ``manifest.json``).
    Writer: an export folder of the plan behind the layers. Sample data: the demo
    scenarios.

``stimplan preview FILE`` calls :func:`stimplan_napari.preview.preview`.

Every exposure figure shown carries the cautions of :mod:`stimplan.cautions`.
"""
