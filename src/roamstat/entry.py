"""The ``roamstat`` command's entry point: one BLAS thread per process, then the CLI.

roamstat runs animals in parallel with processes (``--workers``), and its numerical work is
many small optimisations.  BLAS thread pools spin while they wait for work, and on a busy
2-core machine they made scipy's small L-BFGS-B fits cost 14.8 s instead of 0.06 s in a
profile of ``run`` on the sample.  The limit is a default: a user's own ``OPENBLAS_NUM_THREADS``
or ``OMP_NUM_THREADS`` wins.  It must be set before numpy is first imported, hence this module;
``import roamstat`` as a library leaves threads alone.
"""

from __future__ import annotations

import os

BLAS_THREAD_VARIABLES = ("OPENBLAS_NUM_THREADS", "OMP_NUM_THREADS", "MKL_NUM_THREADS")


def main(argv: list[str] | None = None) -> int:
    """Limit BLAS threads to one (unless the user set them), then run :func:`roamstat.cli.main`."""
    for name in BLAS_THREAD_VARIABLES:
        os.environ.setdefault(name, "1")
    from roamstat.cli import main as cli_main  # numpy loads here, after the limit

    return cli_main(argv)
