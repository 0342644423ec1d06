"""Synthetic data with known ground truth: hot-stage time-lapse stacks and DSC isotherms.

Film kinetics: nuclei from a Poisson process in the plane (athermal: N_A per mm², all at
the induction time; sporadic: Ndot per mm² per s from the induction time on), sampled on
the field of view plus a guard band so that spherulites grow in from the edges. A nucleus
born inside material that is already crystalline (a phantom) is dropped. Fronts advance
at a constant radial rate G; each pixel's arrival time and owner follow the Johnson-Mehl
tessellation t(p) = min_i (t_i + |p − c_i| / G), computed once; frames are rendered from
it (see :mod:`analysis.synthetic.optics`).

Clocks: ``times_s`` are on the recording clock (frame 0 at 0). The sample reaches Tc at
``isothermal_start_s`` on that clock (positive: the recording started before Tc was
reached; negative: it started late, so spherulites may already be present in frame 0).
Nucleation times and the induction time are on the isothermal clock (0 = Tc reached),
like ``nucleation_time_s`` in :mod:`analysis.results`.

Coordinates: x = column, y = row, pixel centres at integers, frame 0's pixel grid. Stage
drift moves the specimen by ``drift_px[i]`` = (dy, dx) on the sensor in frame i
(frame 0: none); dust and illumination stay on the sensor.
"""

from __future__ import annotations

import json
import math
import os
from dataclasses import asdict, dataclass, field, fields
from pathlib import Path
from typing import Any

import numpy as np
import tifffile
from scipy import optimize
from scipy.spatial import cKDTree

from analysis.errors import InputError
from analysis.synthetic import camera, optics
from analysis.synthetic.dsc import (
    DscIsotherm,
    simulate_dsc_isotherm,
    write_dsc_csv,
)
from analysis.synthetic.optics import SyntheticStack

__all__ = [
    "DscIsotherm", "simulate_dsc_isotherm", "write_dsc_csv",
    "StackParams", "FilmKinetics", "SyntheticStack", "simulate_film_kinetics",
    "simulate_stack", "write_stack", "stack_truth", "visible_nuclei", "johnson_mehl_arrival",
]


def _p(default, help_text, **limits):
    """A StackParams field: default, help text for the CLI, and accepted range."""
    return field(default=default, metadata={"help": help_text, **limits})


@dataclass(frozen=True)
class StackParams:
    """Every knob of a simulated recording (units in the names; defaults look realistic)."""

    # recording
    n_frames: int = _p(60, "number of frames", lo=1, hi=100_000)
    height_px: int = _p(384, "frame height, px", lo=8, hi=8192)
    width_px: int = _p(384, "frame width, px", lo=8, hi=8192)
    um_per_px: float = _p(1.0, "pixel size, µm/px", lo=1e-3, hi=1e3, open_lo=True)
    interval_s: float = _p(10.0, "frame interval, s", lo=0.0, open_lo=True)
    isothermal_start_s: float = _p(
        0.0, "recording-clock time (s) at which the sample reached Tc; negative = the recording "
        "started late (spherulites already present in frame 0)")
    # kinetics
    growth_rate_um_per_min: float = _p(10.0, "radial growth rate G, µm/min", lo=0.0, hi=1e5, open_lo=True)
    n_athermal_per_mm2: float = _p(150.0, "athermal nuclei per mm² (all at the induction time)", lo=0.0)
    ndot_per_mm2_per_s: float = _p(0.0, "sporadic nucleation rate, nuclei per mm² per s", lo=0.0)
    induction_time_s: float = _p(0.0, "isothermal time (s) at which nucleation and growth start", lo=0.0)
    guard_band_um: float | None = _p(
        None, "width of the band outside the field where nuclei are sampled, µm (default: the "
        "largest radius reached, capped)", lo=0.0)
    # optics
    polarizer_angle_deg: float = _p(0.0, "polarizer direction, degrees (extinction cross along it)")
    retardation_plate: bool = _p(False, "first-order retardation plate at 45° (RGB output)")
    plate_retardation_nm: float = _p(530.0, "retardation of the plate, nm", lo=0.0, hi=1500.0)
    spherulite_retardation_nm: float = _p(130.0, "retardation a spherulite adds/subtracts, nm", lo=0.0, hi=900.0)
    spherulite_sign: str = _p("positive", "optical sign of the spherulites", choices=("positive", "negative"))
    band_period_um: float = _p(0.0, "banding period, µm (0: no bands)", lo=0.0)
    band_contrast: float = _p(0.7, "banding depth, 0..1", lo=0.0, hi=1.0)
    texture_contrast: float = _p(0.3, "fibrillar texture contrast, 0..1", lo=0.0, hi=1.0)
    front_width_px: float = _p(1.0, "width of the soft growth front, px", lo=0.05, hi=50.0)
    melt_level: float = _p(0.03, "melt brightness between crossed polarizers, 0..1", lo=0.0, hi=1.0)
    brightness: float = _p(0.75, "brightest spherulite level, 0..1", lo=0.0, hi=1.0, open_lo=True)
    vignetting: float = _p(0.2, "illumination fall-off in the corners, 0..1", lo=0.0, hi=0.95)
    dust_specks: int = _p(15, "dust specks on the sensor", lo=0, hi=10_000)
    scratches: int = _p(2, "scratches on the sensor", lo=0, hi=1000)
    drift_px_per_frame: float = _p(0.03, "stage drift, px per frame", lo=0.0, hi=5.0)
    drift_angle_deg: float = _p(30.0, "drift direction, degrees from the x axis (towards +y)")
    drift_jitter_px: float = _p(0.01, "random-walk part of the drift, px per frame", lo=0.0, hi=5.0)
    flicker: float = _p(0.01, "relative frame-to-frame lamp flicker (std)", lo=0.0, hi=0.5)
    read_noise: float = _p(0.008, "Gaussian read noise, fraction of full scale", lo=0.0, hi=0.5)
    photons_full_scale: float = _p(4000.0, "photons at full scale for shot noise (0: none)", lo=0.0)
    bit_depth: int = _p(8, "bits per sample", choices=(8, 16))
    jpeg_quality: int = _p(0, "JPEG round trip of every frame at this quality (0: none)", lo=0, hi=100)
    # camera effects (analysis.synthetic.camera), all off by default
    exact_poisson: bool = _p(False, "draw shot noise from a Poisson law instead of its Gaussian approximation")
    gain_fpn: float = _p(0.0, "per-pixel gain spread (fixed-pattern noise), fraction", lo=0.0, hi=0.5)
    row_column_noise: float = _p(0.0, "row and column offset noise per frame, fraction of full scale",
                                 lo=0.0, hi=0.5)
    defocus_blur_px: float = _p(0.0, "defocus blur, Gaussian sigma in px (0: in focus)", lo=0.0, hi=20.0)
    illumination_gradient: float = _p(0.0, "light falling linearly across the field by this fraction",
                                      lo=0.0, hi=0.95)
    gradient_angle_deg: float = _p(0.0, "direction of the illumination fall, degrees from the x axis")
    lamp_warmup: float = _p(0.0, "lamp output this fraction low at the start, warming up over the run",
                            lo=0.0, hi=0.9)
    lamp_warmup_tau_s: float = _p(200.0, "time constant of the lamp warm-up, s", lo=0.0, open_lo=True)
    bubbles: int = _p(0, "gas bubbles in the film (no crystal inside, a bright rim)", lo=0, hi=1000)
    seed: int = _p(0, "random seed", lo=0)


def validate_params(params: StackParams) -> None:
    """Raise InputError naming the first absurd parameter."""
    for f in fields(params):
        value, meta = getattr(params, f.name), f.metadata
        if value is None:
            continue
        if "choices" in meta and value not in meta["choices"]:
            raise InputError(f"{f.name} must be one of {meta['choices']}, got {value!r}")
        if isinstance(value, (int, float)) and not isinstance(value, bool):
            if not math.isfinite(value):
                raise InputError(f"{f.name} must be finite, got {value}")
            lo, hi = meta.get("lo", -math.inf), meta.get("hi", math.inf)
            too_low = value <= lo if meta.get("open_lo") else value < lo
            if too_low or value > hi:
                raise InputError(f"{f.name} = {value} is outside the accepted range "
                                 f"{'(' if meta.get('open_lo') else '['}{lo}, {hi}]")
    if params.retardation_plate and params.bit_depth != 8:
        raise InputError("RGB stacks (retardation plate) are 8-bit: an ImageJ hyperstack cannot hold "
                         "16-bit RGB")


_CHUNK_POINTS = 1 << 18
_MAX_CANDIDATES = 1 << 22  # (points × nearest nuclei) per KD-tree query
_MAX_NUCLEI = 2_000_000
TRUTH_FORMAT = "spherokin-synthetic-truth"


def johnson_mehl_arrival(points_yx, centres_yx, birth_s, growth_px_per_s, *, horizon_s=math.inf,
                         exclude_self=False):
    """First arrival time of any front at each point, and which nucleus gets there first.

    t(p) = min_i (birth_i + |p − c_i| / G), exact: candidates come from a KD-tree in
    growing batches of nearest centres until no farther nucleus could arrive earlier
    (distance >= G · (best − earliest birth)).

    Parameters
    ----------
    points_yx : ndarray, (M, 2)
        Query points, pixel units (row, column).
    centres_yx : ndarray, (N, 2)
        Nucleus centres, pixel units.
    birth_s : ndarray, (N,)
        Nucleation times, s.
    growth_px_per_s : float
        Radial growth rate, px/s.
    horizon_s : float
        Arrivals later than this are reported as +inf with owner -1 (saves work).
    exclude_self : bool
        Points are the centres themselves; ignore each nucleus at its own centre.

    Returns
    -------
    arrival_s : ndarray float64 (M,)
    owner : ndarray int32 (M,)
    """
    points_yx = np.asarray(points_yx, dtype=float)
    arrival = np.full(len(points_yx), np.inf)
    owner = np.full(len(points_yx), -1, np.int32)
    n = len(centres_yx)
    if n == 0 or (exclude_self and n == 1):
        return arrival, owner
    tree = cKDTree(centres_yx)
    earliest = float(np.min(birth_s))
    k0 = min(8 + int(exclude_self), n)
    work = [(np.arange(i, min(i + _CHUNK_POINTS, len(points_yx))), k0)
            for i in range(0, len(points_yx), _CHUNK_POINTS)]
    while work:
        pending, k = work.pop()
        if len(pending) > 1 and len(pending) * k > _MAX_CANDIDATES:  # bound the memory
            half = len(pending) // 2
            work += [(pending[:half], k), (pending[half:], k)]
            continue
        dist, idx = tree.query(points_yx[pending], k=k, workers=-1)
        dist, idx = dist.reshape(len(pending), k), idx.reshape(len(pending), k)
        candidate = birth_s[idx] + dist / growth_px_per_s
        if exclude_self:
            candidate[idx == pending[:, None]] = np.inf
        best_col = np.argmin(candidate, axis=1)
        best = candidate[np.arange(len(pending)), best_col]
        # a nucleus farther than every candidate cannot beat min(best, horizon)
        reach = growth_px_per_s * (np.minimum(best, horizon_s) - earliest)
        done = (k >= n) | (dist[:, -1] >= reach)
        within = done & (best <= horizon_s)
        arrival[pending[within]] = best[within]
        owner[pending[within]] = idx[within, best_col[within]]
        if not np.all(done):
            work.append((pending[~done], min(4 * k, n)))
    return arrival, owner


@dataclass(frozen=True)
class FilmKinetics:
    """True film kinetics on a grid padded by ``pad_px`` around the field of view.

    ``arrival_pad_s`` is on the isothermal clock (inf: not within the record); element
    [0, 0] of the padded grids is pixel (-pad_px, -pad_px) of frame 0.
    """

    params: StackParams
    centres_yx: np.ndarray  # (N, 2) all surviving nuclei (field + guard band), px
    birth_s: np.ndarray  # (N,) isothermal clock
    arrival_pad_s: np.ndarray = field(repr=False)
    owner_pad: np.ndarray = field(repr=False)
    pad_px: int = 0
    guard_band_um: float = 0.0
    phantom_centres_yx: np.ndarray = field(default_factory=lambda: np.zeros((0, 2)), repr=False)
    phantom_birth_s: np.ndarray = field(default_factory=lambda: np.zeros(0), repr=False)

    @property
    def n_phantoms(self) -> int:
        """Nuclei dropped because they would have been born inside crystalline material."""
        return len(self.phantom_birth_s)

    @property
    def arrival_field_s(self) -> np.ndarray:
        """Arrival time on frame 0's field, isothermal clock, s (float32, inf = never)."""
        p = self.pad_px
        return self.arrival_pad_s[p:p + self.params.height_px, p:p + self.params.width_px]

    @property
    def owner_field(self) -> np.ndarray:
        p = self.pad_px
        return self.owner_pad[p:p + self.params.height_px, p:p + self.params.width_px]

    def area_fraction(self, t_iso_s) -> np.ndarray:
        """True transformed fraction of frame 0's field at isothermal times ``t_iso_s``."""
        ordered = np.sort(self.arrival_field_s, axis=None)
        return np.searchsorted(ordered, np.asarray(t_iso_s, dtype=np.float32), side="right") / ordered.size


def recording_times_s(params: StackParams) -> np.ndarray:
    return np.arange(params.n_frames) * float(params.interval_s)


def drift_path_px(params: StackParams) -> np.ndarray:
    """(n_frames, 2) specimen displacement (dy, dx) on the sensor; frame 0 is (0, 0)."""
    rng = np.random.default_rng([params.seed, 3])
    steps = np.arange(params.n_frames)[:, None] * params.drift_px_per_frame
    angle = math.radians(params.drift_angle_deg)
    path = steps * np.array([math.sin(angle), math.cos(angle)])
    walk = np.cumsum(rng.normal(0.0, params.drift_jitter_px, (params.n_frames, 2)), axis=0)
    path = path + walk
    return path - path[0]


def _horizon_iso_s(params: StackParams) -> float:
    """Latest isothermal time that matters: the last frame plus the soft-front width."""
    last = recording_times_s(params)[-1] - params.isothermal_start_s
    return last + params.front_width_px * params.um_per_px / (params.growth_rate_um_per_min / 60.0)


def _guard_band_um(params: StackParams, horizon_s: float) -> float:
    """Width of the band outside the field where nuclei are sampled.

    A nucleus farther out than G·(horizon − induction) cannot reach the field within the
    record. The band is also capped at G·τ where the extended fraction reaches 30: by τ
    every point is covered (probability 1 − e^-30) by a nucleus closer than G·τ, and
    anything farther would arrive later still.
    """
    if params.guard_band_um is not None:
        return float(params.guard_band_um)
    g_um_per_s = params.growth_rate_um_per_min / 60.0
    reach = g_um_per_s * max(horizon_s - params.induction_time_s, 0.0)
    n_um2, ndot_um2_s = params.n_athermal_per_mm2 * 1e-6, params.ndot_per_mm2_per_s * 1e-6
    if n_um2 == 0 and ndot_um2_s == 0:
        return 0.0
    extended = lambda r: math.pi * n_um2 * r**2 + (math.pi / 3.0) * ndot_um2_s * r**3 / g_um_per_s
    covered = 1.0
    while extended(covered) < 30.0:
        covered *= 2.0
    return min(reach, optimize.brentq(lambda r: extended(r) - 30.0, 0.0, covered))


def _sample_nuclei(params, lo_px, hi_px, horizon_s, rng):
    """Poisson nuclei in the rectangle [lo, hi) (pixel units): centres (N, 2) and births."""
    area_mm2 = float(np.prod(np.subtract(hi_px, lo_px))) * (params.um_per_px * 1e-3) ** 2
    growing_s = max(horizon_s - params.induction_time_s, 0.0)
    n_ath = rng.poisson(params.n_athermal_per_mm2 * area_mm2)
    n_spo = rng.poisson(params.ndot_per_mm2_per_s * area_mm2 * growing_s)
    if n_ath + n_spo > _MAX_NUCLEI:
        raise InputError(f"{n_ath + n_spo} nuclei to simulate (limit {_MAX_NUCLEI}): lower the "
                         "nucleation density or rate, or set a narrower guard band")
    centres = rng.uniform(lo_px, hi_px, size=(n_ath + n_spo, 2))
    birth = np.concatenate([np.full(n_ath, float(params.induction_time_s)),
                            params.induction_time_s + growing_s * rng.random(n_spo)])
    order = np.lexsort((centres[:, 1], centres[:, 0], birth))
    return centres[order], birth[order]


def _arrival_on_grid(shape, pad, centres, birth, g_px_per_s, horizon):
    """Arrival (float32) and owner (int32) maps of a grid whose [0, 0] is pixel (-pad, -pad)."""
    arrival = np.empty(shape, np.float32)
    owner = np.empty(shape, np.int32)
    rows_per_block = max(1, _CHUNK_POINTS // shape[1])
    cols = np.arange(shape[1], dtype=float) - pad
    for r0 in range(0, shape[0], rows_per_block):
        rows = np.arange(r0, min(r0 + rows_per_block, shape[0]), dtype=float) - pad
        points = np.column_stack([np.repeat(rows, len(cols)), np.tile(cols, len(rows))])
        a, o = johnson_mehl_arrival(points, centres, birth, g_px_per_s, horizon_s=horizon)
        arrival[r0:r0 + len(rows)] = a.reshape(len(rows), -1)
        owner[r0:r0 + len(rows)] = o.reshape(len(rows), -1)
    return arrival, owner


def simulate_film_kinetics(params: StackParams, *, nuclei=None) -> FilmKinetics:
    """Nuclei, arrival-time and owner maps of a film (no rendering).

    ``nuclei``: optional (N, 3) array of (y_px, x_px, t_s) on frame 0's grid and the
    isothermal clock, used instead of the Poisson sampling (phantoms are still dropped).
    """
    validate_params(params)
    horizon = _horizon_iso_s(params)
    pad = int(math.ceil(np.abs(drift_path_px(params)).max())) + 2
    shape = (params.height_px + 2 * pad, params.width_px + 2 * pad)
    if nuclei is None:
        guard_px = _guard_band_um(params, horizon) / params.um_per_px
        lo = np.array([-pad - 0.5 - guard_px] * 2)
        hi = np.array([params.height_px + pad - 0.5 + guard_px, params.width_px + pad - 0.5 + guard_px])
        centres, birth = _sample_nuclei(params, lo, hi, horizon, np.random.default_rng([params.seed, 0]))
    else:
        table = np.asarray(nuclei, dtype=float).reshape(-1, 3)
        if not np.all(np.isfinite(table)):
            raise InputError("nuclei must be finite (y_px, x_px, t_s) rows")
        guard_px, centres, birth = 0.0, table[:, :2], table[:, 2]
    g_px_per_s = params.growth_rate_um_per_min / 60.0 / params.um_per_px
    if len(centres) > 1 and np.ptp(birth) > 0:
        covered_at, _ = johnson_mehl_arrival(centres, centres, birth, g_px_per_s, exclude_self=True)
        survivors = ~(covered_at < birth - 1e-9 * max(1.0, abs(horizon)))
    else:
        survivors = np.ones(len(centres), bool)
    arrival, owner = _arrival_on_grid(shape, pad, centres[survivors], birth[survivors], g_px_per_s, horizon)
    return FilmKinetics(
        params=params, centres_yx=centres[survivors], birth_s=birth[survivors],
        arrival_pad_s=arrival, owner_pad=owner,
        pad_px=pad, guard_band_um=guard_px * params.um_per_px,
        phantom_centres_yx=centres[~survivors], phantom_birth_s=birth[~survivors],
    )


def simulate_stack(params: StackParams, *, nuclei=None) -> SyntheticStack:
    """Simulate a hot-stage recording; frames are rendered lazily (see :class:`SyntheticStack`).

    ``nuclei``: optional explicit (N, 3) array of (y_px, x_px, t_s), see
    :func:`simulate_film_kinetics`.
    """
    kinetics = simulate_film_kinetics(params, nuclei=nuclei)
    times = recording_times_s(params)
    rng = np.random.default_rng([params.seed, 1])
    origin = (-kinetics.pad_px, -kinetics.pad_px)
    crystal = optics.crystal_appearance(kinetics.owner_pad, kinetics.centres_yx, origin, params, rng)
    melt = np.asarray(optics.melt_colour(params), np.float32)
    field_shape = (params.height_px, params.width_px)
    sensor = optics.sensor_transmission(field_shape, params, rng)
    sensor = sensor * camera.illumination_gradient(field_shape, params) * camera.sensor_gain_pattern(
        field_shape, params)
    gain = 1.0 + params.flicker * np.random.default_rng([params.seed, 4]).standard_normal(params.n_frames)
    gain = gain * camera.lamp_levels(times, params)
    solid, rim = camera.bubble_maps(kinetics.owner_pad.shape, params)
    if params.retardation_plate:
        solid, rim = solid[..., None], rim[..., None]
    crystal = melt + (crystal - melt) * solid + rim if params.bubbles else crystal
    melt = melt + rim if params.bubbles else melt
    return SyntheticStack(
        params=params, kinetics=kinetics, times_s=times, drift_px=drift_path_px(params),
        area_fraction=kinetics.area_fraction(times - params.isothermal_start_s),
        melt=melt, contrast=crystal - melt,
        sensor=sensor[..., None] if params.retardation_plate else sensor,
        gain=gain.astype(np.float32),
    )


def visible_nuclei(sim: SyntheticStack) -> list[dict[str, Any]]:
    """Nuclei born by the last frame, inside the field or outside it but owning field pixels.

    ``id`` indexes ``sim.kinetics.centres_yx`` (the values of ``sim.owner``).
    """
    k, p = sim.kinetics, sim.params
    y, x = k.centres_yx[:, 0], k.centres_yx[:, 1]
    inside = (y >= -0.5) & (y < p.height_px - 0.5) & (x >= -0.5) & (x < p.width_px - 0.5)
    owns = np.zeros(len(y), bool)
    owns[np.unique(sim.owner[sim.owner >= 0])] = True
    born = k.birth_s <= sim.times_s[-1] - p.isothermal_start_s
    return [
        {"id": int(i), "x_px": float(x[i]), "y_px": float(y[i]), "t_s": float(k.birth_s[i]),
         "t_recording_s": float(k.birth_s[i] + p.isothermal_start_s), "inside": bool(inside[i])}
        for i in np.flatnonzero((inside | owns) & born)
    ]


def stack_truth(sim: SyntheticStack) -> dict[str, Any]:
    """Everything ``truth.json`` holds (JSON-ready)."""
    p = sim.params
    return {
        "format": TRUTH_FORMAT, "schema": 1, "simulated": True,
        "um_per_px": p.um_per_px, "interval_s": p.interval_s,
        "times_s": [float(t) for t in sim.times_s],
        "isothermal_start_s": p.isothermal_start_s, "induction_time_s": p.induction_time_s,
        "growth_rate_um_per_min": p.growth_rate_um_per_min,
        "n_athermal_per_mm2": p.n_athermal_per_mm2, "ndot_per_mm2_per_s": p.ndot_per_mm2_per_s,
        "seed": p.seed, "guard_band_um": sim.kinetics.guard_band_um,
        "phantom_nuclei_dropped": sim.kinetics.n_phantoms,
        "clocks": "times_s and t_recording_s: recording clock (frame 0 at 0 s); t_s and "
                  "induction_time_s: isothermal clock (0 s when the sample reached Tc, which is "
                  "isothermal_start_s on the recording clock)",
        "nuclei": visible_nuclei(sim),
        "area_fraction": [float(a) for a in sim.area_fraction],
        "drift_px": [[float(dy), float(dx)] for dy, dx in sim.drift_px],
        "params": asdict(p),
    }


def write_stack(sim: SyntheticStack, out_dir: str | os.PathLike, *, compression: str | None = None,
                write_maps: bool = False) -> Path:
    """Write ``stack.tif`` (ImageJ hyperstack with µm/px and frame interval) and ``truth.json``.

    ``compression``: None or "zlib" (lossless). ``write_maps``: also ``truth_maps.npz`` with
    the arrival map (recording clock) and owner map on frame 0's grid. Returns the folder.
    """
    out = Path(out_dir)
    _check_output_folder(out)
    p = sim.params
    shape = (p.n_frames, p.height_px, p.width_px) + ((3,) if p.retardation_plate else ())
    try:
        with tifffile.TiffWriter(out / "stack.tif", imagej=True) as tif:
            tif.write(
                sim.frames(), shape=shape, dtype=np.uint8 if p.bit_depth == 8 else np.uint16,
                resolution=(1.0 / p.um_per_px, 1.0 / p.um_per_px),
                metadata={"axes": "TYXS" if p.retardation_plate else "TYX", "unit": "um",
                          "finterval": p.interval_s},
                photometric="rgb" if p.retardation_plate else "minisblack", compression=compression,
            )
        (out / "truth.json").write_text(json.dumps(stack_truth(sim), indent=1), encoding="utf-8")
        if write_maps:
            np.savez_compressed(out / "truth_maps.npz", arrival_s=sim.arrival_s, owner=sim.owner)
    except OSError as exc:
        raise InputError(f"cannot write the simulated stack: {exc.strerror or exc}", out) from exc
    return out


def _check_output_folder(out: Path) -> None:
    """Create ``out``; refuse to overwrite a stack.tif that this simulator did not write."""
    try:
        out.mkdir(parents=True, exist_ok=True)
    except OSError as exc:
        raise InputError(f"cannot create the output folder: {exc.strerror or exc}", out) from exc
    if not (out / "stack.tif").exists():
        return
    try:
        ours = json.loads((out / "truth.json").read_text(encoding="utf-8")).get("format") == TRUTH_FORMAT
    except (OSError, ValueError, AttributeError):
        ours = False
    if not ours:
        raise InputError("holds a stack.tif that is not a simulated stack; choose another folder", out)
