"""Inputs the kinetics and temperature-series pages both take from the project.

No science here: the calorimetry analysis comes from ``analysis.kinetics.calorimetry``;
this module caches it and picks the inputs an experiment's settings name.
"""

from __future__ import annotations

import os
import re
from collections import OrderedDict

from analysis.errors import InputError
from analysis.kinetics.calorimetry import analyze_source


class CalorimetryCache:
    """The last few ``analysis.kinetics.calorimetry.analyze_source`` results, keyed by the source.

    The file's modification time is part of the key, so an edited export is re-read.
    """

    def __init__(self, size: int = 16):
        self._results: OrderedDict = OrderedDict()
        self._size = size

    def analyze(self, source):
        try:
            stamp = os.stat(source.file).st_mtime_ns
        except OSError as error:
            raise InputError(f"cannot read calorimetry file ({error.strerror})", source.file) from None
        key = (source, stamp)
        if key not in self._results:
            self._results[key] = analyze_source(source)
            _trim(self._results, self._size)
        self._results.move_to_end(key)
        return self._results[key]


def _trim(cache: OrderedDict, size: int) -> None:
    while len(cache) > size:
        cache.popitem(last=False)


def volumetric_density(result, experiment) -> tuple[float | None, float | None]:
    """(N_V in mm⁻³, film thickness h in µm used): the pipeline's N_V, else N_A / h
    exactly as ``analysis.kinetics.avrami`` forms it for the bulk prediction."""
    nuc = result.nucleation
    h = experiment.thickness_um or result.thickness_um
    if nuc.density_per_mm3 is not None:
        return nuc.density_per_mm3, h
    if nuc.density_per_mm2 is None or not h:
        return None, h
    return nuc.density_per_mm2 / (h * 1e-3), h


def material_for(experiment, project) -> str | None:
    """The material whose densities convert calorimetry to a volume basis."""
    source = experiment.calorimetry
    return (source.material if source is not None and source.material else None) or project.material


def file_stem(name: str) -> str:
    """A file-name-safe version of an experiment name."""
    stem = re.sub(r"[^A-Za-z0-9._-]+", "_", name).strip("._")
    return stem or "experiment"
