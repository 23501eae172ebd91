"""napari plugin of stimplan: preview, review and sequence holographic stimuli.

The plugin is a thin layer: every computation is a call into ``stimplan``.
"""
