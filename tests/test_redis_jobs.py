"""The Redis job backend on its own, against the real Redis (no server process).

A reader (any API worker polling the job) and the RQ work horse claiming it run at the
same time on different hosts; these tests make them race on purpose.
"""

from __future__ import annotations

import json
import threading

import pytest

from service.jobs.model import DONE
from service.jobs.redis_backend import RedisJobs
from tests.conftest import scenario_bytes
from tests.references import max_flow_of

pytestmark = pytest.mark.redis

DEPOTS_BODY = scenario_bytes("depots-maxflow")


def test_a_reader_polling_during_the_claim_never_sees_a_lost_worker(redis_url, redis_prefix):
    # The claim once moved the record to "running" and set the lease in a second round
    # trip; a read in between took the worker for lost and failed a healthy job.
    backend = RedisJobs(redis_url, prefix=redis_prefix, queue=redis_prefix + "queue", lease=5.0)
    try:
        for _ in range(8):
            record = backend.submit("acme", "maxflow", DEPOTS_BODY, time_limit=30)
            seen: set[str] = set()
            worker = threading.Thread(target=backend.run, args=(record.id,))
            worker.start()
            while worker.is_alive():
                seen.add(backend.get("acme", record.id).state)
            worker.join()
            final = backend.get("acme", record.id)
            assert final.state == DONE, (final.state, final.error, seen)
            assert "failed" not in seen
            assert json.loads(final.result)["value"] == max_flow_of(json.loads(DEPOTS_BODY))
            assert final.attempts == 1
    finally:
        backend.close()
