"""``stimplan preview``: open napari with the plan of a sequence file."""

from __future__ import annotations

import os

__all__ = ["preview", "open_plan"]


def open_plan(viewer, plan) -> None:
    """Show a plan in a viewer: its layers and the sequence and readout panels, docked.

    Parameters
    ----------
    viewer : napari.Viewer
    plan : Plan
    """
    from ._widgets import PLUGIN, SEQUENCE_PANEL

    _, sequence = viewer.window.add_plugin_dock_widget(PLUGIN, SEQUENCE_PANEL)
    if plan.spec.source_path:
        sequence.sequence_file.value = plan.spec.source_path
    sequence.set_plan(plan)  # adds the layers, docks the readout, shows the warnings


def preview(path: str | os.PathLike[str], close_after_load: bool = False) -> int:
    """Plan a sequence file and open it in napari.

    Parameters
    ----------
    path : path-like
        The sequence file (TOML).
    close_after_load : bool
        Build everything, process the pending events, close the viewer and
        return (for tests and scripted checks).

    Returns
    -------
    int
        0 (the command's exit code).

    Raises
    ------
    StimplanError
        For an invalid sequence (the command line prints it as one line).
    """
    import napari
    from qtpy.QtWidgets import QApplication

    from stimplan.plan import plan_sequence
    from stimplan.plan.memory import check_memory
    from stimplan.sequence import load_sequence

    spec = load_sequence(path)
    check_memory(spec)
    plan = plan_sequence(spec, progress=True)
    viewer = napari.Viewer(title=f"stimplan preview: {spec.title}", show=not close_after_load)
    try:
        open_plan(viewer, plan)
        QApplication.processEvents()
    except BaseException:
        viewer.close()
        raise
    if close_after_load:
        viewer.close()
        QApplication.processEvents()
        return 0
    napari.run()
    return 0
