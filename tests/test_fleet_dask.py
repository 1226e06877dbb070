"""The fleet review on Dask (optional extra, installed by README's test command): a small local cluster."""

import json
import os

import pytest

if os.environ.get("CI") != "true":      # in CI the extra is installed and a missing Dask fails here
    pytest.importorskip("distributed")
    pytest.importorskip("pandas")

from altox.evaluation import fleet
from altox.evaluation.fleet_dask import review_dataframe, review_on_dask, write_partitions  # noqa: E402

from test_fleet import make_fleet  # noqa: E402


@pytest.fixture(scope="module")
def client():
    from distributed import Client, LocalCluster

    cluster = LocalCluster(n_workers=1, threads_per_worker=2, processes=False, dashboard_address=None)
    with Client(cluster) as c:
        yield c
    cluster.close()


def test_dask_engine_gives_the_local_lines_dataframe_and_partition_files(client, tmp_path):
    made = make_fleet(tmp_path / "fleet")
    local = list(fleet.review_plans([tmp_path / "fleet"], batch=3))
    on_dask = list(review_on_dask([tmp_path / "fleet"], client=client, batch=3, window=2))
    assert [json.dumps(x, sort_keys=True) for x in on_dask] == [json.dumps(x, sort_keys=True) for x in local]
    assert sum(x["status"] == "error" for x in on_dask) == len(made["bad"])

    df = review_dataframe([tmp_path / "fleet"], batch=3)
    assert df.npartitions == -(-len(local) // 3)
    pdf = df.compute(scheduler=client.get)
    assert list(pdf["source"]) == [x["source"] for x in local]
    ok = pdf[pdf["status"] == "ok"]
    assert list(ok["worst_sao2_pct"].astype(float)) == [x["worst_sao2_pct"] for x in local if x["status"] == "ok"]

    files = write_partitions([tmp_path / "fleet"], tmp_path / "out", fmt="jsonl", batch=3)
    assert len(files) == df.npartitions
    back = [json.loads(t) for f in files for t in open(f, encoding="utf-8")]
    assert [x["source"] for x in back] == [x["source"] for x in local]
    with pytest.raises(fleet.AltoxError, match="not an empty folder"):
        write_partitions([tmp_path / "fleet"], tmp_path / "out", fmt="jsonl")


def test_parquet_partitions(client, tmp_path):
    import pandas as pd

    make_fleet(tmp_path / "fleet")
    files = write_partitions([tmp_path / "fleet" / "jets"], tmp_path / "pq", batch=1)
    assert len(files) == 2
    back = pd.read_parquet(tmp_path / "pq")
    assert back["worst_sao2_pct"].notna().all() and set(back["status"]) == {"ok"}
