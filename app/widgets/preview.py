"""Run one widget alone on a project, for quick looks and documentation screenshots.

Every panel and view module ends with ``run_alone(TheWidget, sys.argv)`` under
``if __name__ == "__main__"``, so ``python -m app.microscopy.viewer sample_images/demo.spherokin.json``
shows just that widget, fed by a real model with every experiment analysed.
"""

from __future__ import annotations

from PySide6 import QtWidgets

from analysis.errors import InputError


def run_alone(view_class, argv: list[str], size: tuple[int, int] = (1600, 1000)) -> int:  # pragma: no cover
    """``python -m app.MODULE PROJECT [--experiment I] [--screenshot OUT.png]``.

    Opens the project, analyses every experiment, shows the widget (constructed with the
    shared model as its only argument) at ``size``; with ``--screenshot`` saves the
    rendered widget and exits.
    """
    import argparse

    from analysis.spherulites.pipeline import analyze_experiment
    from app.core.model import STATUS_FAILED, ProjectModel

    parser = argparse.ArgumentParser(prog=f"python -m {view_class.__module__}")
    parser.add_argument("project")
    parser.add_argument("--experiment", type=int, default=0)
    parser.add_argument("--screenshot")
    args = parser.parse_args(argv[1:])
    app = QtWidgets.QApplication(argv[:1])
    model = ProjectModel()
    model.open_project(args.project)
    for i, experiment in enumerate(model.experiments()):
        try:
            model.set_analysis(i, analyze_experiment(experiment), experiment)
        except InputError as error:
            model.set_status(i, STATUS_FAILED, str(error))
    model.select(args.experiment)
    view = view_class(model)
    view.resize(*size)
    view.show()
    if args.screenshot:
        app.processEvents()
        ok = view.grab().save(args.screenshot)
        print(args.screenshot if ok else f"{args.screenshot}: could not write the image")
        return 0 if ok else 1
    return app.exec()
