"""``spherokin lauritzen-hoffman``: secondary-nucleation fit of a growth-rate table."""

from __future__ import annotations

from analysis.outputs import prepare_output_folder
from analysis.kinetics.lauritzen_hoffman import (
    LHConstants,
    fit_lauritzen_hoffman,
    read_growth_table,
    write_secondary_nucleation,
)
from analysis.settings import DEFAULT_U_STAR_J_PER_MOL


def add_cli_arguments(parser) -> None:
    parser.add_argument("table", help="CSV: temperature_c, growth_rate_um_per_min[, ci95_um_per_min]")
    parser.add_argument("--out", required=True, help="output directory")
    parser.add_argument("--tm0-c", type=float, required=True, help="equilibrium melting point, C")
    parser.add_argument("--tg-c", type=float, required=True, help="glass transition, C")
    parser.add_argument("--u-star-j-mol", type=float, default=DEFAULT_U_STAR_J_PER_MOL,
                        help="transport activation energy U*, J/mol (default %(default)g)")
    parser.add_argument("--t-inf-c", type=float, help="T_inf, C (default Tg - 30 K)")
    parser.add_argument("--material", help="material for sigma*sigma_e (b0, dH0, rho_c)")


def run_cli(args) -> int:
    prepare_output_folder(args.out)
    table = read_growth_table(args.table)
    constants = LHConstants(args.tm0_c, args.tg_c, args.u_star_j_mol, args.t_inf_c)
    analysis = fit_lauritzen_hoffman(table.temperature_c, table.growth_rate_um_per_min,
                                     table.ci95_um_per_min, constants=constants,
                                     material=args.material, path=table.path)
    path = write_secondary_nucleation(analysis, args.out)
    fit = analysis.overall
    ci = f" +/- {fit.kg_ci95:.3g}" if fit.kg_ci95 is not None else ""
    parts = ", ".join(f"{r.name}: Kg {r.kg_k2:.4g} K^2 ({r.t_low_c:g}-{r.t_high_c:g} C)"
                      for r in analysis.regimes)
    print(f"{table.path}: Kg = {fit.kg_k2:.4g}{ci} K^2; {parts}; wrote {path}")
    for warning in analysis.warnings:
        print(f"warning: {warning}")
    return 0
