"""The PDF volumes of a dossier: the report and its annexes."""

from __future__ import annotations

from dataclasses import dataclass


@dataclass(frozen=True)
class Volume:
    """One PDF of the dossier, rendered and cached on its own.

    The report is short: what a reviewer reads and signs (executive summary with the verdicts
    and the recommendation, conclusions, test notes, sign-off, cautions). It attaches the annexes
    and the data; the annexes hold the results in detail and the evidence. Only the report holds
    the narrative, so a change to it re-renders the report alone.
    """

    key: str
    filename: str
    template: str
    label: str
    title: str
    scope: str = ""

    @property
    def is_annex(self) -> bool:
        return self.key != REPORT_KEY


REPORT_KEY = "report"
REPORT = Volume(REPORT_KEY, "dossier.pdf", "print.html", "Report", "Report")
ANNEXES = (
    Volume(
        "results",
        "annex-a-results.pdf",
        "print-results.html",
        "Annex A",
        "Results in detail",
        "Findings at the nominal load, every candidate against the baseline, and what the differences mean "
        "for vehicle balance",
    ),
    Volume(
        "specimens",
        "annex-b-specimens.pdf",
        "print-specimens.html",
        "Annex B",
        "Specimens and fit reports",
        "Identity from the sidewall, rig files, metrics by load and the fit report of every channel",
    ),
    Volume(
        "rig-runs",
        "annex-c-rig-runs.pdf",
        "print-rig-runs.html",
        "Annex C",
        "Rig runs and conditioning",
        "The verdict of every run; its operating points, dropped data, hysteresis, offsets, drift and coverage",
    ),
    Volume(
        "provenance",
        "annex-d-provenance.pdf",
        "print-provenance.html",
        "Annex D",
        "Method, definitions and provenance",
        "How the numbers were made, what each metric means and the source lines behind every fit",
    ),
)
VOLUMES = (REPORT, *ANNEXES)
