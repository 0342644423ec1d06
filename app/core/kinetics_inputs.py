"""Inputs the kinetics and temperature-series pages both take from the project.

No science here: the calorimetry analysis comes from ``analysis.kinetics.calorimetry``;
this module caches it. Which inputs an experiment uses is decided in
``analysis.reporting.entries``.
"""

from __future__ import annotations

import os
from collections import OrderedDict

from analysis.errors import InputError
from analysis.intervals import DEFAULT_SEED
from analysis.kinetics.calorimetry import analyze_source
from analysis.reporting.entries import experiment_calorimetry, experiment_entry


class CalorimetryCache:
    """The last few ``analysis.kinetics.calorimetry.analyze_source`` results, keyed by the source.

    The file's modification time is part of the key, so an edited export is re-read.
    """

    def __init__(self, size: int = 16):
        self._results: OrderedDict = OrderedDict()
        self._size = size

    def analyze(self, source, seed: int = DEFAULT_SEED, intervals: bool = True):
        """``analyze_source(source, seed=seed, intervals=intervals)``, cached (``seed``: of
        the intervals' resampling, the project's stored one so that the pages agree with
        the report; ``intervals`` False: the point values only, at once)."""
        try:
            stamp = os.stat(source.file).st_mtime_ns
        except OSError as error:
            raise InputError(f"cannot read calorimetry file ({error.strerror})", source.file) from None
        key = (source, stamp, seed, intervals)
        if key not in self._results:
            self._results[key] = analyze_source(source, seed=seed, intervals=intervals)
            _trim(self._results, self._size)
        self._results.move_to_end(key)
        return self._results[key]


class ReportEntryCache:
    """Report entries kept while their inputs stay the same, so that what an entry caches
    (its bootstrap intervals of the prediction) is computed once per analysed result, not
    on every refresh of a page. The calorimetry goes through :attr:`calorimetry`."""

    def __init__(self, size: int = 64):
        self.calorimetry = CalorimetryCache()
        self._entries: OrderedDict = OrderedDict()
        self._size = size

    def entry(self, experiment, result, material: str | None, *, stage_uncertainty_k: float | None,
              seed: int = DEFAULT_SEED):
        """``analysis.reporting.entries.report_entry`` of these inputs, the same object as
        last time when the result and the calorimetry result are the same objects."""
        calorimetry, problem = experiment_calorimetry(
            experiment, material, lambda source: self.calorimetry.analyze(source, seed=seed))
        key = (experiment, material, stage_uncertainty_k, seed)
        kept = self._entries.get(key)
        if kept is None or kept.result is not result or kept.calorimetry is not calorimetry \
                or kept.calorimetry_problem != problem:
            kept = experiment_entry(experiment, result, calorimetry, problem,
                                    stage_uncertainty_k=stage_uncertainty_k, seed=seed)
            self._entries[key] = kept
            _trim(self._entries, self._size)
        self._entries.move_to_end(key)
        return kept


def _trim(cache: OrderedDict, size: int) -> None:
    while len(cache) > size:
        cache.popitem(last=False)
