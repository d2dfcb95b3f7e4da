"""GUI tests run without a display: choose Qt's offscreen platform before Qt is imported."""

import os

os.environ.setdefault("QT_QPA_PLATFORM", "offscreen")
