"""The review window: a thin PySide6 and pyqtgraph layer over reviewer.core."""
