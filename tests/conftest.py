"""Test set-up shared by every test module."""

import os

# One BLAS thread: the dense modal eigenproblems are small, and on a shared two-core machine
# threaded BLAS is several times slower for them (see auditor/__init__.py).
os.environ.setdefault("OPENBLAS_NUM_THREADS", "1")
os.environ.setdefault("OMP_NUM_THREADS", "1")
