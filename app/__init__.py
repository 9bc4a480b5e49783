"""gainboard.app: the command line and the browser workbench.

Kept light on import so the command line starts fast; Panel is imported only
by the modules that serve the workbench.
"""

import os

# Plants are small (n ≲ 50): multi-threaded BLAS only adds thread hand-off cost on such matrices
# (measured here: one workbench evaluation 440–775 ms threaded vs 140–250 ms single-threaded on a
# busy 2-core machine). Must run before numpy loads OpenBLAS; setdefault lets a user override it.
for _variable in ("OPENBLAS_NUM_THREADS", "OMP_NUM_THREADS", "MKL_NUM_THREADS"):
    os.environ.setdefault(_variable, "1")
