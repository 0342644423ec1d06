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


def _trim(cache: OrderedDict, size: int) -> None:
    while len(cache) > size:
        cache.popitem(last=False)
