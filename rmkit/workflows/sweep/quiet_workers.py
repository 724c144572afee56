"""A worker plugin that keeps our local dask workers quiet below CRITICAL.

``LocalCluster(silence_logs=...)`` reaches only the nanny's logger inside a worker process, so a
worker closing while its heartbeat is in flight (Ctrl-C, the end of a sweep) still prints a
connection traceback at ERROR from ``distributed.worker``. The sweep reports what matters itself:
a lost cell becomes an error record with its reason. Imported only when a local cluster starts.
"""

from __future__ import annotations

import logging

from distributed import WorkerPlugin


class QuietWorkerLogs(WorkerPlugin):
    """Sets the ``distributed`` loggers of every worker, present and restarted, to CRITICAL."""

    idempotent = True

    def setup(self, worker) -> None:
        logging.getLogger("distributed").setLevel(logging.CRITICAL)
