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

__all__ = ["RampAnalysis", "SUB_PIXEL_FRONT_PX", "analyze_ramp", "front_advance_px_per_frame",
           "ramp_points"]

#: Below this advance per frame the radii rest on sub-pixel front motion and on how the
#: arrival map times the slowest pixels, so G(T) there is flagged (common practice: a
#: quantity sampled below its resolution is not measured).
SUB_PIXEL_FRONT_PX = 1.0


@dataclass(frozen=True)
class RampAnalysis:
    programme: TemperatureProgramme
    growth: RampGrowth | FitFailure
    nucleation: RampNucleation
    frame_temperature_c: np.ndarray
    #: How far the fitted front moves between frames at each temperature of G(T), px
    #: (empty when G(T) failed).
    front_advance_px_per_frame: np.ndarray

    def warnings(self) -> list[str]:
        """The G(T) fit's warnings and where the fronts move less than a pixel per frame."""
        if not self.growth:
            return []
        notes = list(self.growth.warnings)
        slow = self.growth.temperature_c[self.front_advance_px_per_frame < SUB_PIXEL_FRONT_PX]
        if slow.size:
            notes.append(f"at {slow.min():.1f}-{slow.max():.1f} °C the fronts move less than "
                         f"{SUB_PIXEL_FRONT_PX:g} px per frame: G(T) there rests on sub-pixel motion "
                         "(column front_advance_px_per_frame); record faster or with finer pixels")
        return notes


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
    advance = np.zeros(0)
    if growth:
        advance = front_advance_px_per_frame(growth.growth_rate_um_per_min,
                                             float(np.median(np.diff(times))),
                                             float(analysis.arrival.um_per_px))
    return RampAnalysis(programme, growth, nucleation, programme.temperature_at(times), advance)


def front_advance_px_per_frame(growth_um_per_min, frame_interval_s: float, um_per_px: float) -> np.ndarray:
    """How far a front growing at G (µm/min) moves between two frames ``frame_interval_s``
    apart on pixels of ``um_per_px``, px."""
    return np.asarray(growth_um_per_min, float) / 60.0 * frame_interval_s / um_per_px


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
