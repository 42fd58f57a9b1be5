"""Local processes and a Dask cluster give the same results as a serial run."""
from __future__ import annotations

import json

import pandas as pd
import pytest

from sweep.parallel import dask_mapper, process_mapper
from sweep.pipeline import run_study
from sweep.study import load_study


def outputs(d):
    rec = json.loads((d / "run.json").read_text())
    digests = {k: v for k, v in rec["sha256"].items() if not k.endswith(".xlsx")}   # dated inside
    return (pd.read_parquet(d / "designs.parquet"), pd.read_parquet(d / "points.parquet"), digests)


@pytest.fixture(scope="module")
def study():
    return load_study("studies/buzzer.toml")


@pytest.fixture(scope="module")
def serial(examples):
    """The example's serial run of the session (default blocks): the parallel runs below use
    other blocks, and results must not depend on block boundaries either."""
    assert examples["buzzer"].code == 0, examples["buzzer"].stderr
    return outputs(examples["buzzer"].out)


@pytest.mark.slow
def test_two_local_processes_equal_serial(study, serial, tmp_path):
    run_study(study, tmp_path, chunk=4096, mapper=process_mapper(2))
    got = outputs(tmp_path)
    pd.testing.assert_frame_equal(got[0], serial[0])
    pd.testing.assert_frame_equal(got[1], serial[1])
    assert got[2] == serial[2]


@pytest.mark.slow
def test_two_worker_dask_cluster_on_loopback_equals_serial(study, serial, tmp_path):
    distributed = pytest.importorskip("distributed")
    with distributed.LocalCluster(n_workers=2, threads_per_worker=1, host="127.0.0.1",
                                  dashboard_address=None, processes=True) as cluster:
        mapper = dask_mapper(cluster.scheduler_address)
        try:
            run_study(study, tmp_path, chunk=4096, mapper=mapper)
        finally:
            mapper.close()
    got = outputs(tmp_path)
    pd.testing.assert_frame_equal(got[0], serial[0])
    pd.testing.assert_frame_equal(got[1], serial[1])
    assert got[2] == serial[2]


def test_unreachable_scheduler_is_a_clear_error(study, tmp_path):
    from sweep.errors import InputError
    with pytest.raises(InputError) as e:     # refused when connecting, before the run starts
        run_study(study, tmp_path, mapper=dask_mapper("tcp://127.0.0.1:9"))
    assert "--scheduler" in e.value.message and "127.0.0.1:9" in e.value.message
    assert not any(p.name.endswith((".xlsx", ".html", ".json")) for p in tmp_path.iterdir())
