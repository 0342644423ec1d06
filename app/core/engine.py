"""The seam between the application and the analysis: what the GUI asks of ``analysis``.

The model and the runner see the analysis only through :class:`AnalysisEngine`: analyse
one experiment (a progress generator that returns an
:class:`~analysis.spherulites.pipeline.Analysis`) and replay the user's edits over an
existing analysis. :class:`PipelineEngine` is the real one; tests hand the model a fake
engine instead of replacing modules. The types across the seam are the analysis's own
frozen dataclasses; the analysis modules are imported only when first used, so the
window opens before scipy and OpenCV have loaded.
"""

from __future__ import annotations

from typing import TYPE_CHECKING, Generator, Protocol, Sequence

if TYPE_CHECKING:  # the real modules load on first use (see PipelineEngine)
    from analysis.edits import Edit
    from analysis.progress import Progress
    from analysis.project.file import Experiment
    from analysis.spherulites.pipeline import Analysis

__all__ = ["AnalysisEngine", "PipelineEngine"]


class AnalysisEngine(Protocol):
    """Analyse an experiment; apply edits to an analysis. Bad input raises ``InputError``."""

    def analyze_iter(self, experiment: Experiment) -> Generator[Progress, None, Analysis]:
        """Yield progress while analysing ``experiment`` (its settings and edits); return the analysis."""
        ...

    def apply_edits(self, analysis: Analysis, edits: Sequence[Edit]) -> Analysis:
        """``analysis`` with ``edits`` (the whole list) replayed over its automatic detections."""
        ...


class PipelineEngine:
    """The analysis of :mod:`analysis.spherulites.pipeline`."""

    def analyze_iter(self, experiment: Experiment) -> Generator[Progress, None, Analysis]:
        from analysis.spherulites.pipeline import analyze_experiment_iter

        return analyze_experiment_iter(experiment)

    def apply_edits(self, analysis: Analysis, edits: Sequence[Edit]) -> Analysis:
        from analysis.spherulites.pipeline import apply_edits

        return apply_edits(analysis, edits)
