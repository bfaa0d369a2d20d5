"""The Dask path: a LocalCluster on loopback gives the same results as the local run."""

from __future__ import annotations

import pytest

from sectio.study import load_study, run_study

from .conftest import json_files


def test_dask_cluster_results_equal_local_run(study_dir, tmp_path):
    distributed = pytest.importorskip("dask.distributed")
    st = load_study(study_dir / "study.toml")
    run_study(st, tmp_path / "local", workers=1, report=False)
    with distributed.LocalCluster(n_workers=1, threads_per_worker=2, processes=False,
                                  host="127.0.0.1", dashboard_address=":0",
                                  protocol="tcp") as cluster:
        assert cluster.scheduler_address.startswith("tcp://127.0.0.1:")
        run = run_study(st, tmp_path / "dask", scheduler=cluster.scheduler_address,
                        report=False)
    assert (run.computed, run.failed) == (6, [])
    assert json_files(tmp_path / "dask") == json_files(tmp_path / "local")


def test_unreachable_scheduler_is_reported(study_dir, tmp_path):
    pytest.importorskip("dask.distributed")
    from sectio.errors import InputError

    st = load_study(study_dir / "study.toml")
    # Port 9 (discard) on loopback: nothing listens there in a test set-up.
    with pytest.raises(InputError, match=r"Cannot reach the Dask scheduler at tcp://127"):
        run_study(st, tmp_path / "o", scheduler="tcp://127.0.0.1:9", report=False,
                  scheduler_timeout_s=2.0)
