"""Test set-up: one BLAS thread per process.

The machines are shared 2-core boxes; BLAS threads fighting over them make the
SVD-heavy tests (matrix pencil) many times slower. Set before numpy loads.
"""

import os

for _var in ("OPENBLAS_NUM_THREADS", "OMP_NUM_THREADS", "MKL_NUM_THREADS"):
    os.environ.setdefault(_var, "1")
