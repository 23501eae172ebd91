"""The exposure-and-efficiency panel: a table per stimulus, the sequence's figures, the verdict.

Every exposure figure it shows goes with the cautions.
"""

from __future__ import annotations

from typing import TYPE_CHECKING

from magicgui.widgets import Container, Label, Table, TextEdit

from stimplan.cautions import CAUTIONS

from ._layers import EXPORT_KEY, PLAN_KEY, RESULT_KEY
from ._readout import (
    export_text,
    readout_from_plan,
    readout_table,
    readout_text,
    verdict_line,
)
from ._widgets import wrapping

if TYPE_CHECKING:  # pragma: no cover
    import napari

__all__ = ["ReadoutPanel"]


class ReadoutPanel(Container):
    """Efficiency, power per ON pixel against the mask, exposure per rule and the verdict.

    Shows the plan of the stimplan layer last added or selected: one table
    row per distinct stimulus (:func:`~stimplan_napari._readout.readout_table`),
    then the sequence's figures and the cautions as text.
    """

    def __init__(self, viewer: napari.viewer.Viewer) -> None:
        super().__init__(labels=False)
        self._viewer = viewer
        self.verdict = wrapping(Label(value="no stimplan result yet"))
        self.table = Table(columns=list(readout_table(None)[0]))
        self.table.read_only = True
        self.table.native.setMinimumHeight(120)
        self.figures = TextEdit(value="")
        self.figures.native.setReadOnly(True)
        self.figures.native.setMinimumHeight(180)
        self.figures.native.setMinimumWidth(240)
        self.figures.value = "Caution: " + CAUTIONS
        self.extend([self.verdict, self.table, self.figures])
        self.plan = None
        self.readout = None
        viewer.layers.events.inserted.connect(self._on_inserted)
        viewer.layers.selection.events.active.connect(self._on_active)
        for layer in viewer.layers:
            self._take(layer)

    def show_plan(self, plan, title: str | None = None) -> None:
        """Show the figures of a plan."""
        self.plan = plan
        r = readout_from_plan(plan, title)
        self.readout = r
        self.verdict.value = verdict_line(r)
        colour = "#e05050" if r.verdict == "above" else "#50c050"
        self.verdict.native.setStyleSheet(f"color: {colour}; font-weight: bold")
        columns, rows = readout_table(r)
        self.table.value = {
            "data": rows,
            "index": [str(k + 1) for k in range(len(rows))],
            "columns": list(columns),
        }
        self.table.native.resizeColumnsToContents()
        self.figures.value = readout_text(r, stimuli=False)

    def show_export(self, md: dict) -> None:
        """Show the figures an export folder's manifest recorded (no plan is at hand)."""
        self.plan = md[EXPORT_KEY]
        self.readout = None
        text, verdict = export_text(md)
        self.verdict.value = verdict
        colour = "#e05050" if md.get("verdict") == "above" else "#50c050"
        self.verdict.native.setStyleSheet(f"color: {colour}; font-weight: bold")
        self.table.value = {"data": [], "index": [], "columns": list(readout_table(None)[0])}
        self.figures.value = text

    def _take(self, layer) -> None:
        md = getattr(layer, "metadata", None) or {}
        if EXPORT_KEY in md and md[EXPORT_KEY] != self.plan:
            self.show_export(md)
        elif PLAN_KEY in md and md[PLAN_KEY] is not self.plan:
            self.show_plan(md[PLAN_KEY])
        elif RESULT_KEY in md and md[RESULT_KEY].plan is not self.plan:
            res = md[RESULT_KEY]
            self.show_plan(res.plan, title=f"stimulus: {res.request.kind}")

    def _on_inserted(self, event) -> None:
        self._take(event.value)

    def _on_active(self, event) -> None:
        if event.value is not None:
            self._take(event.value)
