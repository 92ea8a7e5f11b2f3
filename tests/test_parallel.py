"""pooler.planning.parallel.ParallelRunner: the simulations' tasks run in this process, in
local processes or on a dask.distributed cluster with identical results (each task carries its
own seed), and a scheduler that cannot be reached is a clean OptionError.

The reference for "identical" is the same computation in this process: no published value is
involved, the check is exact equality."""
from __future__ import annotations

import pytest

from pooler.errors import OptionError
from pooler.planning.parallel import ParallelRunner


def _chunks():
    """Real work units of the path simulation: four chunks of replications of simple
    mediation (a = b = 0.3) at n = 60 and n = 120, each with its own seed."""
    from pooler.planning import simdesign as sd
    plan = sd._Plan(sd.SimpleMediation(0.3, 0.3), "joint", 0.05, 1000, 1000)
    return [t for n in (60, 120) for t in sd._tasks(plan, n, 2 * sd.CHUNK, 31, 0, 0)]


def test_in_process_and_local_processes_give_identical_results_in_task_order():
    from pooler.planning.simdesign import _run_chunk
    tasks = _chunks()
    with ParallelRunner(workers=1) as one:
        here = one.map(_run_chunk, tasks)
    seen = []
    with ParallelRunner(workers=2) as two:
        spread = two.map(_run_chunk, tasks, progress=lambda d, t: seen.append((d, t)),
                         offset=3, total=10)
    assert here == spread
    assert len(here) == 4 and here[0] != here[2]        # the two n differ: order is kept
    assert sorted(seen) == [(4, 10), (5, 10), (6, 10), (7, 10)]


def test_a_dask_cluster_gives_identical_results_for_every_simulation():
    # the three users of the runner: the path simulation, the stress test of the planning
    # rules and (tests/test_paths_stress.py) the stress check of the path-sheet route
    distributed = pytest.importorskip("dask.distributed")
    from pooler.planning.simdesign import SerialMediation, _run_chunk, simulate_power
    from pooler.planning.simulate import Cell, Shapes, stress_test
    d = SerialMediation(0.3, 0.3, 0.3, direct=0.1)
    cells = [Cell(5, 0.3, 0.1, 0.5)]
    local = simulate_power(d, 80, test="joint", reps=750, seed=25)
    local_stress = stress_test(cells, Shapes.generic(), reps=2, seed=5, workers=1)
    with ParallelRunner(workers=1) as one:
        here = one.map(_run_chunk, _chunks())
    with distributed.LocalCluster(n_workers=1, threads_per_worker=2, processes=False,
                                  dashboard_address=None) as cluster, \
            distributed.Client(cluster) as client:
        remote = simulate_power(d, 80, test="joint", reps=750, seed=25, scheduler=client)
        remote_stress = stress_test(cells, Shapes.generic(), reps=2, seed=5, scheduler=client)
        with ParallelRunner(scheduler=client) as runner:
            there = runner.map(_run_chunk, _chunks())
        assert client.status == "running"        # a Client passed in is left to its owner
    assert local.to_dict() == remote.to_dict()
    assert local_stress.to_dict() == remote_stress.to_dict()
    assert here == there


@pytest.fixture
def short_connect_timeout():
    """dask's connect timeout at 1 s instead of 30 s, so an unreachable address fails fast."""
    dask = pytest.importorskip("dask")
    pytest.importorskip("dask.distributed")
    with dask.config.set({"distributed.comm.timeouts.connect": "1s"}):
        yield


# port 9 of this machine's loopback: nothing listens there (the discard service is not run)
UNREACHABLE = "tcp://127.0.0.1:9"


def test_an_unreachable_scheduler_is_an_option_error(short_connect_timeout):
    with pytest.raises(OptionError, match=r"^`scheduler` 'tcp://127.0.0.1:9' cannot be "
                                          r"reached \(.*\): start a scheduler there") as err:
        with ParallelRunner(scheduler=UNREACHABLE):
            pass
    assert err.value.parameter == "scheduler" and err.value.__cause__ is None
    with pytest.raises(OptionError, match=r"^`scheduler` 'my-cluster' is not a scheduler "
                                          r"address \(.*\); write it as tcp://HOST:PORT"):
        with ParallelRunner(scheduler="my-cluster"):
            pass


def test_the_cli_names_its_flag_and_prints_no_traceback(run_cli, short_connect_timeout):
    res = run_cli("paths", "--design", "simple-mediation", "--a", 0.3, "--b", 0.3,
                  "--test", "joint", "--n", 100, "--reps", 250, "--scheduler", UNREACHABLE)
    assert res.exit_code == 2
    assert res.stderr.startswith("pooler: error: --scheduler 'tcp://127.0.0.1:9' cannot be "
                                 "reached (")
    assert "Traceback" not in res.stderr and res.stdout == ""
    assert len(res.stderr.strip().splitlines()) == 1
