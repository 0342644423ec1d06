"""spherokin analysis core: pure, Qt-free computation.

Everything here works on numpy arrays and small frozen dataclasses, with units in the
names (``radius_um``, ``time_s``). The GUI in ``app/`` calls into this package; this
package never imports Qt or ``app`` (enforced by ``tests/analysis/test_no_qt.py``).
"""

__version__ = "0.1.0"
