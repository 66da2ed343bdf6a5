"""The ``tubewright`` command, the console script's entry point: ``cli.main`` with what only a whole process
should do before and after it.

Before: one BLAS and OpenMP thread per process unless the environment already says how many. The verbs
solve many small problems and spread their own work over processes (the figure worker, screening, studies,
alternatives); the idle threads of numpy's and scipy's OpenBLAS only compete with those processes for the
cores (measured on the demo optimisation: 1.81 s -> 1.73 s mean of 12 interleaved runs, the robust design
no slower). The variables are read when numpy is first imported, hence this module imports the command line
only inside ``console``.

After: what is still alive is moved out of the garbage collector's reach (gc.freeze): the last collection at
interpreter exit would otherwise traverse every object of the models built (0.15-0.25 s after an optimisation
of the demo) for memory the operating system reclaims anyway. Every file and store is closed by then, and
atexit and weakref.finalize callbacks still run. Tests call ``cli.main()``, which leaves both alone."""

from __future__ import annotations

import gc
import os

THREAD_VARIABLES = ("OPENBLAS_NUM_THREADS", "OMP_NUM_THREADS", "MKL_NUM_THREADS")


def console() -> int:
    for name in THREAD_VARIABLES:
        os.environ.setdefault(name, "1")
    from tubewright.optimizer.cli import main

    code = main()
    gc.freeze()
    return code
