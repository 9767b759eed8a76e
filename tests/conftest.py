"""Options shared by the whole test suite.

One BLAS thread, as the command line sets for itself (chain/cli.py): the
matrices are small, and extra BLAS threads only add hand-off cost (on two
busy cores a sixteen-stage headroom solve took about four times longer with
two OpenBLAS threads).  chain.cli's own setting comes too late here, since
test modules import numpy first; the thread count is read when numpy
loads, so it is set before any test module is imported (a value already in
the environment wins).
"""

import os
import sys

for _var in ("OPENBLAS_NUM_THREADS", "OMP_NUM_THREADS", "MKL_NUM_THREADS"):
    os.environ.setdefault(_var, "1")
if "numpy" in sys.modules:  # pragma: no cover - a plugin imported numpy first
    import warnings

    warnings.warn("numpy was imported before tests/conftest.py: the BLAS thread count above has no effect",
                  stacklevel=1)


def pytest_addoption(parser):
    parser.addoption(
        "--update-golden", action="store_true", default=False,
        help="rewrite the golden report files under tests/report/golden/ from the current output "
             "instead of comparing against them",
    )
