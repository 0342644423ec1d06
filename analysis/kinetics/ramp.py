"""One ramp or step experiment analysed: G(T), Kg and nucleation against temperature.

The single place that turns an analysed stack and its temperature programme into the
ramp results; the command line, the report and the application all call
:func:`analyze_ramp`.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from analysis.kinetics.avrami import FitFailure
from analysis.kinetics.lauritzen_hoffman import LHConstants
from analysis.kinetics.nonisothermal import RampGrowth, fit_ramp_growth
from analysis.kinetics.ramp_tracks import area_tracks
from analysis.kinetics.ramp_nucleation import RampNucleation, nucleation_vs_temperature
from analysis.kinetics.temperature_programme import TemperatureProgramme

__all__ = ["RampAnalysis", "analyze_ramp", "ramp_points"]


@dataclass(frozen=True)
class RampAnalysis:
    programme: TemperatureProgramme
    growth: RampGrowth | FitFailure
    nucleation: RampNucleation
    frame_temperature_c: np.ndarray


def analyze_ramp(analysis, programme: TemperatureProgramme, *, constants: LHConstants | None = None,
                 time_offset_s: float = 0.0) -> RampAnalysis:
    """G(T) with its band, the direct Lauritzen-Hoffman fit and N(T) of an analysed stack.

    ``analysis`` is a :class:`analysis.spherulites.pipeline.Analysis` (its arrival map gives
    the per-pixel frames); ``time_offset_s`` turns result times into recording-clock times
    (0 for a ramp experiment, whose results are on the recording clock). InputError when
    the programme does not cover the frames.
    """
    times = np.asarray(analysis.arrival.times_s, float)
    programme.require_coverage(float(times[0]), float(times[-1]))
    tracks = area_tracks(analysis.result, analysis.arrival.frame_index, times, time_offset_s=time_offset_s)
    growth = fit_ramp_growth(tracks, programme, constants=constants)
    nucleation = nucleation_vs_temperature(analysis.result, growth, programme,
                                           field_shape=np.shape(analysis.arrival.frame_index),
                                           time_offset_s=time_offset_s)
    return RampAnalysis(programme, growth, nucleation, programme.temperature_at(times))


def ramp_points(growth: RampGrowth, *, step_k: float = 2.0):
    """(T °C, G µm/min, CI95 half-width µm/min) every ``step_k`` kelvin of the smooth G(T),
    for a Tc-series Lauritzen-Hoffman fit beside isothermal points. The points are not
    independent (one smooth curve); the half-width is the larger side of the band."""
    temps = growth.temperature_c
    picks = np.unique(np.searchsorted(temps, np.arange(temps[0], temps[-1] + 1e-9, step_k)))
    picks = picks[picks < temps.size]
    g = growth.growth_rate_um_per_min[picks]
    half = np.maximum(growth.ci95_high[picks] - g, g - growth.ci95_low[picks])
    return temps[picks], g, half
