"""spherokin desktop application (PySide6 + pyqtgraph). All Qt code lives here."""
