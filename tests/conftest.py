"""Suite-wide set-up: Qt runs offscreen, before any QApplication exists."""

import os

os.environ.setdefault("QT_QPA_PLATFORM", "offscreen")
