"""``spherokin report``: tables, fits and figures for every experiment of a project."""

from __future__ import annotations

from analysis.outputs import prepare_output_folder
from analysis.reporting.report import report_project


def add_cli_arguments(parser) -> None:
    parser.add_argument("project", help="project file (*.spherokin.json)")
    parser.add_argument("--out", required=True, help="output directory")


def run_cli(args) -> int:
    from analysis.project.file import load_project

    prepare_output_folder(args.out)  # before the analysis, which can take minutes
    project = load_project(args.project)
    summary = report_project(project, args.out)
    for problem in summary.problems:
        print(f"note: {problem}")
    print(f"{args.project}: wrote {len(summary.files)} files to {summary.out_dir}")
    return 0
