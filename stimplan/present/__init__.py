"""What a plan shows: its summary, text tables, the HTML report and export folders.

* :mod:`stimplan.present.summary` - the one summary of a plan (figures per
  stimulus and for the sequence) used by the CLI, the report, the export and
  the napari plugin, and its text table.
* :mod:`stimplan.present.report` - the self-contained HTML report.
* :mod:`stimplan.present.events` - one row per light pulse (``events.csv``),
  the pulses the exposure assessment counts.
* :mod:`stimplan.present.export` - hologram stacks, timeline, events and
  manifest, written atomically, and reading them back.

This is the top stage of the flow below the CLI: nothing under ``plan/`` or
the physics packages imports it.
"""
