r"""The lots question under the history prior answered by quadrature, in one process or
split over processes and machines (Dask).

The groups (parts, or the ``group_by`` values) are independent given the data, so the batch
is split into chunks of whole groups; each chunk is answered by
:func:`qualbayes.lot_grid_answers.answer_groups` (deterministic numpy: no seed, no draws)
and the answers are put back in the lots' order. With ``processes`` or ``scheduler`` the
chunks run through ``dask.distributed`` (the optional extra ``qualbayes[cluster]``): a
``LocalCluster`` of ``processes`` processes on this machine, or the scheduler at
``scheduler`` (``"tcp://host:8786"``) for a cluster beyond it. Every worker runs the same
arithmetic on the same chunk, so the answers are identical to one process (tested).
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from qualbayes.lot_answers import RESULT_COLUMNS, group_rows, lot_notes, own_data_columns
from qualbayes.lot_grid_answers import GRID_SIZE, METHOD, answer_groups
from qualbayes.models.lot_history_grid import OUTLIER_LEVEL

#: lots per chunk sent to one worker (whole groups; a group larger than this is one chunk)
CHUNK_LOTS = 20_000
#: groups from which a batch in one call runs on a pool of local processes (one per CPU)
#: instead of threads: numpy's many small operations per group hold the interpreter lock
#: often enough that two threads on 2 cores gained 1.2x on 200 parts x 200 lots, where two
#: processes ran at full speed each (docs/speed.md); a process costs about a second to start
PROCESSES_FROM = 100
ENGINE_NUTS, ENGINE_QUADRATURE = "nuts", "quadrature"
ENGINES = (ENGINE_NUTS, ENGINE_QUADRATURE)
_INT = ("extra_clean_units_to_accept", "remaining_units", "remaining_defectives_median",
        "remaining_defectives_upper")
CLOSE_NOTE = ("lot(s) {names}: too close to call at this quadrature accuracy (P is within its "
              "stated quadrature error of the confidence level); they are undecided")


def chunks(groups: dict[str, np.ndarray], lots: int = CHUNK_LOTS) -> list[list[str]]:
    """Group labels in order, cut into chunks of about ``lots`` lots (whole groups)."""
    out, cur, size = [], [], 0
    for label, idx in groups.items():
        if cur and size + len(idx) > lots:
            out.append(cur)
            cur, size = [], 0
        cur.append(label)
        size += len(idx)
    return out + ([cur] if cur else [])


def _chunk_job(frame: pd.DataFrame, labels: list[str], positions: list[np.ndarray],
               spec: float, confidence: float, prior, size: int,
               workers: int | None = 1) -> dict[str, dict]:
    groups = dict(zip(labels, positions, strict=True))
    return answer_groups(frame, groups, spec, confidence, prior, size, workers)


def run_chunks(frame: pd.DataFrame, groups: dict[str, np.ndarray], spec: float,
               confidence: float, prior, size: int = GRID_SIZE, *, processes: int | None = None,
               scheduler: str | None = None, chunk_lots: int | None = None,
               pool: int | None = None) -> dict[str, dict]:
    """label -> answers of every group: here, or through Dask when ``processes`` (a
    LocalCluster of that many processes) or ``scheduler`` (an address) is given; without
    them, on ``pool`` new local processes when given (:func:`local_processes`). The answers
    are the same in every case (tested)."""
    chunk_lots = CHUNK_LOTS if chunk_lots is None else chunk_lots
    if processes is None and scheduler is None:
        if not pool:  # one process: its threads share the groups
            return answer_groups(frame, groups, spec, confidence, prior, size)
        # four chunks per process, so that an uneven chunk does not leave a CPU idle
        parts = _parts(frame, groups, min(chunk_lots, max(1, -(-len(frame) // (4 * pool)))))
        return _run_pool(parts, spec, confidence, prior, size, pool)
    if processes:  # at least two chunks per process, so that every process has work
        chunk_lots = min(chunk_lots, max(1, -(-len(frame) // (2 * processes))))
    parts = _parts(frame, groups, chunk_lots)
    return _run_dask(parts, spec, confidence, prior, size, processes, scheduler)


def local_processes(groups: int) -> int | None:
    """How many local processes answer a batch of ``groups`` groups when neither processes
    nor a scheduler is given: one per CPU from PROCESSES_FROM groups, else None (threads)."""
    from qualbayes.lot_grid_answers import threads  # noqa: PLC0415

    cpus = threads()
    return cpus if cpus >= 2 and groups >= PROCESSES_FROM else None


def _parts(frame: pd.DataFrame, groups: dict[str, np.ndarray], chunk_lots: int) -> list:
    """(sub-frame, labels, each group's rows in it) of every chunk (:func:`chunks`)."""
    cols = ["defectives", "inspected", "lot_size", "decision_basis"]
    parts = []
    for labels in chunks(groups, chunk_lots):
        rows = np.concatenate([groups[k] for k in labels])
        sub = frame[cols].iloc[rows].reset_index(drop=True)
        ends = np.cumsum([len(groups[k]) for k in labels])
        pos = [np.arange(e - len(groups[k]), e) for k, e in zip(labels, ends, strict=True)]
        parts.append((sub, labels, pos))
    return parts


def _run_pool(parts, spec, confidence, prior, size, workers: int) -> dict[str, dict]:
    """The chunks on ``workers`` new local processes (started fresh, not forked: whatever
    this process holds, such as jax's threads, is not copied), in the chunks' order."""
    import multiprocessing  # noqa: PLC0415
    from concurrent.futures import ProcessPoolExecutor, as_completed  # noqa: PLC0415

    from qualbayes.progress import task  # noqa: PLC0415

    out: dict[str, dict] = {}
    with ProcessPoolExecutor(min(workers, len(parts)),
                             mp_context=multiprocessing.get_context("spawn")) as pool:
        futures = [pool.submit(_chunk_job, sub, labels, pos, spec, confidence, prior, size)
                   for sub, labels, pos in parts]
        with task("quadrature chunks", total=len(futures)) as t:
            for fut in as_completed(futures):
                out.update(fut.result())
                t.advance()
    order = [k for _, labels, _ in parts for k in labels]
    return {k: out[k] for k in order}


def _run_dask(parts, spec, confidence, prior, size, processes, scheduler) -> dict[str, dict]:
    try:
        from dask.distributed import Client, LocalCluster, as_completed  # noqa: PLC0415
    except ImportError as err:
        from qualbayes.errors import ParameterError  # noqa: PLC0415

        raise ParameterError("processes" if processes is not None else "scheduler",
                             processes if processes is not None else scheduler,
                             "running the batch over processes needs Dask: pip install "
                             "'qualbayes[cluster]'") from err
    from qualbayes.progress import task  # noqa: PLC0415

    cluster = None
    if scheduler is None:
        cluster = LocalCluster(n_workers=int(processes), threads_per_worker=1, processes=True,
                               dashboard_address=None)
    try:
        with Client(cluster if cluster is not None else scheduler) as client:
            futures = [client.submit(_chunk_job, sub, labels, pos, spec, confidence, prior,
                                     size, pure=False) for sub, labels, pos in parts]
            out: dict[str, dict] = {}
            with task("quadrature chunks", total=len(futures)) as t:
                for fut in as_completed(futures):
                    out.update(fut.result())
                    t.advance()
    finally:
        if cluster is not None:
            cluster.close()
    order = [k for _, labels, _ in parts for k in labels]
    return {k: out[k] for k in order}


def assess_quadrature(frame: pd.DataFrame, spec: float, confidence: float, hyper,
                      group_by, decision_basis, *, size: int = GRID_SIZE,
                      processes: int | None = None, scheduler: str | None = None,
                      local_pool: bool = False):
    """The lots question under the history prior, every answer from the grid posterior
    (see :mod:`qualbayes.lot_grid_answers`); returns a LotAssessment."""
    from qualbayes.lot_question import MODEL_HISTORY, LotAssessment, lot_columns  # noqa: PLC0415

    groups = group_rows(frame, group_by)
    pool = local_processes(len(groups)) if local_pool and not (processes or scheduler) else None
    answers = run_chunks(frame, groups, spec, confidence, hyper, size, processes=processes,
                         scheduler=scheduler, pool=pool)
    labels = list(groups)
    order = np.concatenate([groups[g] for g in labels]) if labels else np.zeros(0, int)
    group = np.empty(len(frame), dtype=object)
    for label, idx in groups.items():
        group[idx] = label
    frame["group"] = group

    def column(c: str) -> np.ndarray:  # every group's answers, in the lots' order
        values = np.concatenate([np.asarray(answers[g]["columns"][c]) for g in labels])
        out = np.empty(len(frame), dtype=values.dtype)
        out[order] = values
        return out

    for c in [*RESULT_COLUMNS, "prob_within_spec_error", "_approximate"]:
        if c in ("decision_basis", "own_data_prob", "own_data_decision"):
            continue
        if c == "prob_within_spec_mcse":
            frame[c] = np.nan
        elif c == "outlier":
            frame[c] = (column("outlier_p").astype(float) < OUTLIER_LEVEL).astype(object)
        elif c in _INT:
            values = column(c)
            missing = pd.isna(values)
            frame[c] = pd.arrays.IntegerArray(np.where(missing, 0, values).astype(np.int64),
                                              missing)
        elif c in ("decision", "too_close", "_approximate"):
            frame[c] = column(c).astype(object)
        else:
            frame[c] = column(c).astype(float)
    own_data_columns(frame, spec, confidence)
    close = frame["too_close"].astype(bool)
    notes = lot_notes(frame.assign(too_close=False), conflict=None)
    if close.any():
        names = list(frame.loc[close, "lot"].astype(str))
        shown = ", ".join(names[:8]) + (f" and {len(names) - 8} more" if len(names) > 8
                                        else "")
        notes.insert(0, CLOSE_NOTE.format(names=shown))
    model = MODEL_HISTORY.format(spread=_spread(hyper), groups=", ".join(group_by)).replace(
        "NUTS on", "2-D quadrature on")
    errors = [a["accuracy"]["max_error"] for a in answers.values()]
    engine = {"name": ENGINE_QUADRATURE, "method": METHOD.format(size=size), "grid_size": size,
              "max_error": float(max(errors)) if errors else 0.0,
              "processes": "dask scheduler " + scheduler if scheduler else
              (f"dask LocalCluster of {processes} processes" if processes else
               f"{pool} local processes" if pool else "one process"),
              "groups": {k: a["accuracy"] for k, a in answers.items()}}
    notes.append(f"answered by quadrature (no sampling, no seed): the largest stated error of "
                 f"any P is {engine['max_error']:.2g}; a decision within its error of the "
                 f"confidence level is too close to call")
    spread = {"stated_scale": hyper.cv_scale, "words": hyper.describe(),
              "implied_lot_rate": hyper.implied_lot_rate(50_000)}
    columns = lot_columns(frame)
    return LotAssessment(frame[columns], spec, confidence, hyper.describe(), model, None,
                         {}, {k: a["next_lot"] for k, a in answers.items()}, notes,
                         group_by=tuple(group_by), decision_basis=decision_basis,
                         lot_spread=spread, engine=engine)


def _spread(hyper) -> str:
    if hyper.cv_scale is None:
        return "phi = 1/sqrt(kappa+1) ~ Uniform(1e-4, 1) (earlier prior)"
    return (f"tau = 1/sqrt(kappa min(mu, 1-mu)) (about the lot-to-lot CV) ~ "
            f"HalfNormal({hyper.cv_scale:g}), kappa <= 1e8")
