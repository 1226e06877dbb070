"""The fleet review on Dask: partitions of plans mapped through :func:`altox.evaluation.fleet.review_batch`.

Needs the optional extra: ``pip install "altox[dask]"`` (Dask with its distributed scheduler,
pandas and pyarrow).  altox brings no scheduler of its own: Dask places the partitions on a
local cluster or on any running Dask cluster (``scheduler="tcp://host:8786"`` or a
``distributed.Client``), and every partition runs the same function as the local review, so
the result lines are the same whichever engine runs them.

* :func:`review_on_dask` streams result lines in input order, keeping a bounded number of
  partitions in flight (memory stays bounded by the window, not the fleet);
* :func:`review_bag` gives the review as a ``dask.bag.Bag`` of result lines, one partition per
  batch of plans, to combine with other Dask work;
* :func:`review_dataframe` gives a ``dask.dataframe.DataFrame`` with one row per plan (the CSV
  columns of :data:`altox.evaluation.fleet.CSV_COLUMNS`);
* :func:`write_partitions` writes one Parquet or JSON Lines file per partition.
"""

from __future__ import annotations

import os
from collections import deque
from typing import Iterable, Iterator

from altox.errors import AltoxError
from altox.evaluation.fleet import DEFAULT_BATCH, CSV_COLUMNS, iter_sources, result_csv_row, review_batch, to_json_line

__all__ = ["review_on_dask", "review_bag", "review_dataframe", "write_partitions", "local_client"]


def _need_dask():
    try:
        import dask  # noqa: F401
        import distributed  # noqa: F401
    except ImportError:
        raise AltoxError('--engine dask needs Dask: pip install "altox[dask]"', field="--engine") from None


def local_client(workers: int | None = None, *, processes: bool = True):
    """A ``distributed.Client`` on a new local cluster: ``workers`` single-threaded workers (default one per core)."""
    _need_dask()
    from distributed import Client, LocalCluster

    n = workers or os.cpu_count() or 1
    cluster = LocalCluster(n_workers=n, threads_per_worker=1, processes=processes, dashboard_address=None)
    return Client(cluster)


def _batches(sources, batch: int):
    chunk = []
    for src in sources:
        chunk.append(src)
        if len(chunk) >= batch:
            yield chunk
            chunk = []
    if chunk:
        yield chunk


def review_on_dask(inputs: Iterable, *, rules: tuple = (), oxygen: bool = False, decompression: bool = False,
                   batch: int = DEFAULT_BATCH, client=None, scheduler: str | None = None,
                   workers: int | None = None, window: int | None = None, stdin=None) -> Iterator[dict]:
    """Review many plans on Dask; yields result lines in input order, like :func:`altox.evaluation.fleet.review_plans`.

    Parameters
    ----------
    inputs : iterable
        As :func:`altox.evaluation.fleet.iter_sources`.
    client : distributed.Client, optional
        The cluster to use; else ``scheduler`` (an address), else a new local cluster of
        ``workers`` processes that is closed at the end.
    window : int, optional
        Partitions in flight at once (default twice the workers): bounds memory on this side.
    """
    _need_dask()
    own = None
    if client is None:
        if scheduler:
            from distributed import Client

            client = own = Client(scheduler)
        else:
            client = own = local_client(workers)
    try:
        n_workers = max(1, len(client.scheduler_info().get("workers", {})))
        limit = window or 2 * n_workers
        pending = deque()
        for chunk in _batches(iter_sources(inputs, stdin=stdin), batch):
            pending.append(client.submit(review_batch, chunk, rules=tuple(rules), oxygen=oxygen,
                                         decompression=decompression, pure=False))
            while len(pending) >= limit:
                yield from pending.popleft().result()
        while pending:
            yield from pending.popleft().result()
    finally:
        if own is not None:
            cluster = getattr(own, "cluster", None)
            own.close()
            if cluster is not None:
                cluster.close()


def review_bag(inputs: Iterable, *, rules: tuple = (), oxygen: bool = False, decompression: bool = False,
               batch: int = DEFAULT_BATCH, stdin=None):
    """The review as a lazy ``dask.bag.Bag`` of result lines, one partition per ``batch`` plans.

    The plan *sources* (names, or JSON lines) are listed here; reading, validation and
    evaluation happen in the partitions.
    """
    _need_dask()
    import dask.bag as db

    sources = list(iter_sources(inputs, stdin=stdin))
    if not sources:
        raise AltoxError("no plans to review: the inputs name no plan files", field="inputs")
    bag = db.from_sequence(sources, partition_size=batch)
    return bag.map_partitions(lambda part: review_batch(list(part), rules=tuple(rules), oxygen=oxygen,
                                                        decompression=decompression))


_NUMBERS = ("worst_sao2_pct", "worst_leg", "worst_time_h", "worst_altitude_m", "worst_cabin_pressure_altitude_ft",
            "total_hours", "hypoxic_dose_kmh", "rules_broken", "oxygen_highest_fio2_needed",
            "oxygen_highest_flow_l_min", "oxygen_planned_litres", "decompression_worst_leg",
            "decompression_tuc_min_s", "decompression_oxygen_total_l")


def _dtype(column: str) -> str:
    if column in _NUMBERS or column.startswith("hours_cabin_above_"):
        return "Float64"
    return "boolean" if column == "model_valid" else "string"


def _rows(lines):
    """Result lines -> pandas rows: numbers as nullable floats, model_valid as nullable bool, the rest text."""
    import pandas as pd

    rows = [{k: (None if v == "" else v) for k, v in result_csv_row(line).items()} for line in lines]
    df = pd.DataFrame(rows, columns=list(CSV_COLUMNS), dtype=object)
    return df.astype({c: _dtype(c) for c in CSV_COLUMNS})


def review_dataframe(inputs: Iterable, **kwargs):
    """The review as a ``dask.dataframe.DataFrame``: one row per plan, the columns of :data:`CSV_COLUMNS`.

    Numbers are nullable floats and ``model_valid`` a nullable boolean (missing where a plan
    failed or a field does not apply); the rest is text as in the CSV form.  Takes the keywords
    of :func:`review_bag`.
    """
    import dask.dataframe as dd

    bag = review_bag(inputs, **kwargs)
    meta = _rows([])
    return dd.from_delayed([_delayed_rows(part) for part in bag.to_delayed()], meta=meta, verify_meta=False)


def _delayed_rows(part):
    from dask import delayed

    return delayed(_rows)(part)


def write_partitions(inputs: Iterable, folder, *, fmt: str = "parquet", **kwargs) -> list[str]:
    """Write the result lines as one file per partition in ``folder``: Parquet or JSON Lines.

    ``folder`` must not exist yet or be empty (nothing is overwritten).  Returns the files
    written.  Takes the keywords of :func:`review_bag`; compute happens on the current Dask
    scheduler (a ``distributed.Client`` if one is active).
    """
    _need_dask()
    if fmt not in ("parquet", "jsonl"):
        raise AltoxError(f"fmt: {fmt!r} is not a format; expected parquet or jsonl.", field="fmt")
    folder = os.fspath(folder)
    if os.path.exists(folder) and (not os.path.isdir(folder) or os.listdir(folder)):
        raise AltoxError(f"{folder!r} exists and is not an empty folder; refusing to write into it.",
                         field="folder")
    os.makedirs(folder, exist_ok=True)
    if fmt == "jsonl":
        bag = review_bag(inputs, **kwargs).map(to_json_line)
        return list(bag.to_textfiles(os.path.join(folder, "part-*.jsonl")))
    df = review_dataframe(inputs, **kwargs)
    df.to_parquet(folder, write_index=False)
    return sorted(os.path.join(folder, f) for f in os.listdir(folder) if f.endswith(".parquet"))
