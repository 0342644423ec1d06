"""``spherokin lauritzen-hoffman``: secondary-nucleation fit of a growth-rate table."""

from __future__ import annotations

from analysis.intervals import DEFAULT_SEED
from analysis.kinetics.lauritzen_hoffman import LHConstants, read_growth_table, write_secondary_nucleation
from analysis.kinetics.lh_intervals import fit_with_temperature, lh_intervals
from analysis.outputs import prepare_output_folder
from analysis.settings import (
    DEFAULT_STAGE_UNCERTAINTY_K,
    DEFAULT_U_STAR_J_PER_MOL,
    SERIES_SPECS,
    STAGE_UNCERTAINTY_KEY,
    Place,
    parse_value,
)


def add_cli_arguments(parser) -> None:
    parser.add_argument("table", help="CSV: temperature_c, growth_rate_um_per_min[, ci95_um_per_min]")
    parser.add_argument("--out", required=True, help="output directory")
    parser.add_argument("--tm0-c", type=float, required=True, help="equilibrium melting point, C")
    parser.add_argument("--tg-c", type=float, required=True, help="glass transition, C")
    parser.add_argument("--u-star-j-mol", type=float, default=DEFAULT_U_STAR_J_PER_MOL,
                        help="transport activation energy U*, J/mol (default %(default)g)")
    parser.add_argument("--t-inf-c", type=float, help="T_inf, C (default Tg - 30 K)")
    parser.add_argument("--material", help="material for sigma*sigma_e (b0, dH0, rho_c)")
    parser.add_argument("--stage-uncertainty-k", type=float, default=DEFAULT_STAGE_UNCERTAINTY_K,
                        help="standard uncertainty of the stage temperature, K (default 0.5)")
    parser.add_argument("--seed", type=int, default=DEFAULT_SEED,
                        help=f"seed of the resampling (default {DEFAULT_SEED})")


def run_cli(args) -> int:
    prepare_output_folder(args.out)
    table = read_growth_table(args.table)
    spec = next(s for s in SERIES_SPECS if s.key == STAGE_UNCERTAINTY_KEY)
    u_t = parse_value(spec, args.stage_uncertainty_k, Place(table.path))
    constants = LHConstants(args.tm0_c, args.tg_c, args.u_star_j_mol, args.t_inf_c)
    analysis = fit_with_temperature(table.temperature_c, table.growth_rate_um_per_min,
                                    table.ci95_um_per_min, u_t, constants=constants,
                                    material=args.material, path=table.path)
    intervals = lh_intervals(analysis, table.ci95_um_per_min, u_t, seed=args.seed)
    path = write_secondary_nucleation(analysis, args.out, intervals)
    fit = analysis.overall
    kg = intervals.kg_k2
    ci = f" (95 % CI {kg.low:.4g}-{kg.high:.4g})" if kg.low is not None else ""
    parts = ", ".join(f"{r.name}: Kg {r.kg_k2:.4g} K^2 ({r.t_low_c:g}-{r.t_high_c:g} C)"
                      for r in analysis.regimes)
    print(f"{table.path}: Kg = {fit.kg_k2:.4g}{ci} K^2; {parts}; wrote {path}")
    for warning in analysis.warnings:
        print(f"warning: {warning}")
    return 0
