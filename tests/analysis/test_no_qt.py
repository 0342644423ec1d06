"""The analysis core must never load Qt or the application package."""

import pkgutil
import subprocess
import sys

import analysis


def _all_analysis_modules():
    return sorted(f"analysis.{m.name}" for m in pkgutil.iter_modules(analysis.__path__))


def test_importing_every_analysis_module_loads_no_qt():
    modules = _all_analysis_modules()
    code = (
        "import importlib, sys\n"
        f"for name in {modules!r}:\n"
        "    importlib.import_module(name)\n"
        "bad = sorted(m for m in sys.modules if m.split('.')[0] in ('PySide6', 'pyqtgraph', 'app', 'shiboken6'))\n"
        "print(','.join(bad))\n"
    )
    result = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True)
    assert result.stdout.strip() == "", f"analysis/ pulled in: {result.stdout.strip()}"
    assert "analysis.frames" in modules and "analysis.cli" in modules
