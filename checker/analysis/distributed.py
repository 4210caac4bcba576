"""Monte Carlo runs on a Dask distributed scheduler (the optional extra `nodegate[distributed]`).

Each (case, state) at each run of samples is one task (`samples.evaluate`), independent of
the others: the draws are made once, here, from the circuit's seeded stream and handed to
the tasks, and the results are merged in sample order exactly as a local run merges them,
so the report is the same as a local run's for the same seed (on workers whose numpy gives
the same floating-point results: same versions, same kind of processor). Nothing of nodegate
needs to be running on the workers beyond an installed nodegate of the same version.
"""

from __future__ import annotations

from typing import Iterator, Sequence

from checker.analysis.montecarlo import ChunkTally
from checker.analysis.samples import Work, evaluate
from checker.errors import ConfigError


def client_for(scheduler):
    """A `distributed.Client` of the scheduler's address (or of a `distributed` cluster object)."""
    try:
        from distributed import Client
    except ImportError:
        raise ConfigError(f"`scheduler: {scheduler}` needs Dask's distributed scheduler: "
                          "pip install 'nodegate[distributed]'") from None
    return Client(scheduler)


def evaluate_remote(scheduler, jobs: Sequence[Work], runs: Sequence[tuple[int, int]]) -> Iterator[list[ChunkTally]]:
    """What `samples.evaluate` gives for every run and job, in that order (runs outer), computed on the
    scheduler's workers."""
    client = client_for(scheduler)
    try:
        shared = client.scatter(list(jobs), broadcast=True)
        futures = [client.submit(evaluate, job, first, last, pure=False) for first, last in runs for job in shared]
        results = client.gather(futures)
    finally:
        client.close()
    return iter([[result] for result in results])
