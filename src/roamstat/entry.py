"""The ``roamstat`` command's entry point: one BLAS thread per process, then the CLI.

roamstat runs animals in parallel with processes (``--workers``), and its numerical work is
many small optimisations.  BLAS thread pools spin while they wait for work, and on a busy
2-core machine they made scipy's small L-BFGS-B fits cost 14.8 s instead of 0.06 s in a
profile of ``run`` on the sample.  The limit is a default: a user's own ``OPENBLAS_NUM_THREADS``
or ``OMP_NUM_THREADS`` wins.  It must be set before numpy is first imported, hence this module;
``import roamstat`` as a library leaves threads alone.

The objects of the modules loaded first, and when the command is done every object still alive,
are frozen out of the cyclic collector (``gc.freeze``): the collections during the run and the
interpreter's at exit then skip them (at exit they took 0.4-0.6 s of each sample command,
measured). Only the command does this: in a library user's process, frozen garbage would never be
collected.
"""

from __future__ import annotations

import gc
import os

BLAS_THREAD_VARIABLES = ("OPENBLAS_NUM_THREADS", "OMP_NUM_THREADS", "MKL_NUM_THREADS")


def main(argv: list[str] | None = None) -> int:
    """Limit BLAS threads to one (unless the user set them), then run :func:`roamstat.cli.main`."""
    for name in BLAS_THREAD_VARIABLES:
        os.environ.setdefault(name, "1")
    from roamstat.cli import main as cli_main  # numpy loads here, after the limit

    gc.freeze()  # see the module's docstring

    try:
        return cli_main(argv)
    finally:
        gc.freeze()
