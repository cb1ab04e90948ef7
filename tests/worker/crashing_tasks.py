"""Imported by a test worker (``PORECAST_WORKER_IMPORTS``): its main step kills its process.

The task, the claim and the delivery counter are the real ones
(:func:`porecast.services.run_steps.execute`); only the body of the ``main``
step is replaced by a SIGKILL of the pool process running it, the way an
out-of-memory kill or a crash in native code ends a worker.
"""

from __future__ import annotations

import os
import signal

from porecast.services import run_steps


def _kill_my_process(ctx, inputs):  # noqa: ANN001 - the step signature
    os.kill(os.getpid(), signal.SIGKILL)


run_steps.STEPS["main"] = _kill_my_process
