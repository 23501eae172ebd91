"""The one caution that goes with every exposure figure stimplan shows.

The command line, the report and the GUI all print :data:`CAUTIONS` (or the
one-line :data:`CAUTION_SHORT` where space is short) beside any exposure
figure, so that the wording is the same everywhere. :data:`EDITION` names the
edition of the laser-safety standards that :mod:`stimplan.exposure` follows;
it lives here, in a module that imports nothing, so that both the exposure
code and the text can use it.
"""

from __future__ import annotations

__all__ = ["EDITION", "EDITION_SHORT", "CAUTIONS", "CAUTION_SHORT"]

#: The limits the retinal figures follow: at every duration and angle the lower of
#: the 2000 edition (ICNIRP 2000 / IEC 60825-1:2001, published as law text in
#: Directive 2006/25/EC, Annex II) and the 2014 edition (ICNIRP 2013 /
#: IEC 60825-1:2014, whose breakpoints were entered from memory of copies of its
#: tables). See :mod:`stimplan.exposure.factors`.
EDITION = (
    "the lower of Directive 2006/25/EC Annex II (ICNIRP 2000 values, law text) and "
    "ICNIRP 2013 / IEC 60825-1:2014 (values from memory of the tables), retinal thermal "
    "limits, 700-1200 nm"
)

#: A short form of :data:`EDITION` for one-line messages.
EDITION_SHORT = "lower of Directive 2006/25/EC and ICNIRP 2013, retinal thermal"

CAUTIONS = (
    "These exposure figures are an estimate computed by stimplan, not a safety approval. "
    f"They follow {EDITION}, with the human eye as the reference eye, and they rest on the "
    "predicted retinal irradiance, so they are only as good as the optical model and the "
    "measured laser power. The full text of the standard, your laser-safety officer, your "
    "ethics or animal-use protocol and local codes decide what may be used; check every "
    "figure against them before any exposure."
)

CAUTION_SHORT = (
    f"Estimate only, not a safety approval ({EDITION_SHORT}); the standard's full text, "
    "your laser-safety officer and your protocol decide."
)
