"""The exhaustive and deep layers on a Dask cluster (the ``cluster`` extra).

External reference: the same layers in one local process. A local Dask cluster
(two workers in this process, its scheduler on loopback) stands in for a real one;
the tests are skipped where Dask's ``distributed`` is not installed.
"""

from __future__ import annotations

import json
import socket
import sys
from pathlib import Path

import pytest
from joblib import parallel_config

from optimise import cluster
from optimise.cli import main
from optimise.deep import deep_front
from optimise.exhaustive import exhaustive_front
from optimise.profiles import demo_profile
from optimise.seeding import layer_jobs
from optimise.settings import SearchSettings

sys.path.insert(0, str(Path(__file__).parent))

from layer_support import deep_bytes, exhaustive_bytes, split_small  # noqa: E402

distributed = pytest.importorskip("distributed")


@pytest.fixture(scope="module")
def scheduler():
    """Address of a local cluster of two single-thread workers, listening on loopback."""
    with distributed.LocalCluster(
        n_workers=2,
        threads_per_worker=1,
        processes=False,
        protocol="tcp://",
        host="127.0.0.1",
        dashboard_address=None,
    ) as local:
        yield local.scheduler_address


def test_the_layers_on_dask_equal_the_local_ones(scheduler, monkeypatch):
    split_small(monkeypatch)  # several pieces per level, so both workers get some
    profile = demo_profile()
    local_ex = exhaustive_front(profile, max_depth=2, n_jobs=1)
    seeds = [r.notation for r in local_ex.results]
    local_deep = deep_front(profile, max_depth=3, width=6, seeds=seeds, n_jobs=1)
    with cluster.dask_layers(scheduler) as client, distributed.get_task_stream(client) as ran:
        assert len(client.scheduler_info()["workers"]) == 2
        assert layer_jobs(SearchSettings(workers=1)) == -1  # all of the cluster
        on_dask_ex = exhaustive_front(profile, max_depth=2, n_jobs=-1)
        on_dask_deep = deep_front(profile, max_depth=3, width=6, seeds=seeds, n_jobs=-1)
    # the pieces ran on the cluster's workers: depth 2, and levels 1 to 3 (four each)
    assert len(ran.data) >= 1 + 3 * 4
    assert exhaustive_bytes(on_dask_ex) == exhaustive_bytes(local_ex)
    assert deep_bytes(on_dask_deep) == deep_bytes(local_deep)


def test_workers_set_the_layers_jobs_on_this_machine():
    assert layer_jobs(SearchSettings(workers=1)) == 1
    assert layer_jobs(SearchSettings(workers=3)) == 3
    with parallel_config(backend="threading", n_jobs=5):
        assert layer_jobs(SearchSettings(workers=2)) == 2  # a local backend: --workers decides


def test_search_with_a_dask_scheduler_finds_the_local_front(scheduler, tmp_path, capsys):
    args = ["search", "--depth", "2", "--trials", "4", "--no-progress", "--json"]
    fronts = []
    for name, extra in (("here", []), ("there", ["--dask-scheduler", scheduler])):
        code = main([*args, "--runs-dir", str(tmp_path), "--name", name, *extra])
        out, _ = capsys.readouterr()
        assert code == 0
        fronts.append(json.loads(out)["front"])
    assert fronts[0] == fronts[1]


def free_port() -> int:
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        return s.getsockname()[1]


def test_no_scheduler_at_the_address_is_one_line_and_writes_nothing(tmp_path, capsys, monkeypatch):
    monkeypatch.setattr(cluster, "CONNECT_TIMEOUT_S", 1.0)
    address = f"tcp://127.0.0.1:{free_port()}"
    code = main(
        ["search", "--runs-dir", str(tmp_path), "--no-progress", "--dask-scheduler", address]
    )
    out, err = capsys.readouterr()
    assert code == 2 and out == ""
    assert err.count("\n") == 1 and "--dask-scheduler" in err and address in err, err
    assert list(tmp_path.iterdir()) == []


def test_without_the_extra_the_option_says_what_to_install(tmp_path, capsys, monkeypatch):
    monkeypatch.setitem(sys.modules, "distributed", None)  # import distributed fails
    code = main(
        ["search", "--runs-dir", str(tmp_path), "--no-progress", "--dask-scheduler", "tcp://h:8786"]
    )
    out, err = capsys.readouterr()
    assert code == 2 and out == ""
    assert err.count("\n") == 1 and "pip install 'stillroom[cluster]'" in err, err
    assert list(tmp_path.iterdir()) == []
