"""The CPUs this process may use, and an ordered map over threads.

numpy and scipy release the interpreter lock inside their array loops, so blocks of array
work run side by side on threads; the results never depend on the number of threads.

>>> list(ordered_map(lambda v: v * v, [1, 2, 3], workers=2))
[1, 4, 9]
"""

from __future__ import annotations

import os
from collections import deque
from collections.abc import Callable, Iterator
from itertools import islice


def cpus() -> int:
    """The CPUs this process may use."""
    try:
        return max(1, len(os.sched_getaffinity(0)))
    except AttributeError:  # pragma: no cover - not on Linux
        return max(1, os.cpu_count() or 1)


def ordered_map(fn: Callable, items: list, workers: int | None = None) -> Iterator:
    """``fn`` of each item, in order, on up to ``workers`` threads (default :func:`cpus`),
    at most ``workers + 1`` items ahead of the caller: a generator, so that each result can
    be let go once used."""
    workers = min(len(items), cpus() if workers is None else int(workers))
    if workers <= 1:
        yield from map(fn, items)
        return
    from concurrent.futures import ThreadPoolExecutor  # noqa: PLC0415

    with ThreadPoolExecutor(workers) as pool:
        todo = iter(items)
        pending = deque(pool.submit(fn, item) for item in islice(todo, workers + 1))
        while pending:
            done = pending.popleft().result()
            nxt = next(todo, None)
            if nxt is not None:
                pending.append(pool.submit(fn, nxt))
            yield done
