"""Temperature programmes and ramp analyses of ramp experiments, cached for the pages.

No science here: the programme is read by ``analysis.kinetics.temperature_programme``
(through the experiment's ``TemperatureSource``) and G(T) comes from
``analysis.kinetics.ramp.analyze_ramp``; this module keeps the last results so that
scrubbing the viewer or redrawing a page does not read or fit anything twice.
"""

from __future__ import annotations

import os
from collections import OrderedDict

from analysis.errors import InputError
from analysis.kinetics.temperature_programme import programme_of_source


def _log_stamp(source) -> int | None:
    if not source.log_file:
        return None
    try:
        return os.stat(source.log_file).st_mtime_ns
    except OSError:
        return None


class RampCache:
    """Programme and ramp analysis per experiment; a changed log file, source, analysis or
    series constants is read or fitted again."""

    def __init__(self, size: int = 8):
        self._programmes: OrderedDict = OrderedDict()
        self._ramps: OrderedDict = OrderedDict()
        self._size = size

    def programme(self, experiment):
        """(TemperatureProgramme or None, problem text or None) of a ramp experiment."""
        source = getattr(experiment, "temperature_source", None)
        if getattr(experiment, "kind", "isothermal") != "ramp" or source is None:
            return None, None
        key = (source, _log_stamp(source))
        if key not in self._programmes:
            try:
                self._programmes[key] = (programme_of_source(source), None)
            except InputError as error:
                self._programmes[key] = (None, str(error))
            _trim(self._programmes, self._size)
        return self._programmes[key]

    def ramp(self, experiment, analysis, constants):
        """(RampAnalysis or None, problem text or None) for an analysed ramp experiment."""
        from analysis.kinetics.ramp import analyze_ramp

        programme, problem = self.programme(experiment)
        if programme is None or analysis is None:
            return None, problem
        key = (id(analysis), experiment.temperature_source, constants)
        held = self._ramps.get(key)
        if held is None or held[2] is not analysis:  # the analysis is held: its id stays its own
            try:
                held = (analyze_ramp(analysis, programme, constants=constants,
                                     time_offset_s=experiment.isothermal_start_s or 0.0), None, analysis)
            except InputError as error:
                held = (None, str(error), analysis)
            self._ramps[key] = held
            _trim(self._ramps, self._size)
        return held[:2]


def _trim(cache: OrderedDict, size: int) -> None:
    while len(cache) > size:
        cache.popitem(last=False)


#: One cache for the whole application (the viewer and the temperature page share it).
RAMPS = RampCache()
