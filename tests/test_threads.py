"""One BLAS thread for pooler's own work (pooler/_threads.py)."""
from __future__ import annotations

import os
import subprocess
import sys


def _run(code, **env):
    base = {k: v for k, v in os.environ.items()
            if k not in ("OPENBLAS_NUM_THREADS", "OMP_NUM_THREADS", "MKL_NUM_THREADS")}
    base.update(env)
    return subprocess.run([sys.executable, "-c", code], capture_output=True, text=True,
                          check=True, env=base).stdout.strip()


def test_cli_asks_for_one_thread_before_numpy_loads():
    code = ("import pooler.cli, os, sys; print('numpy' in sys.modules, "
            "os.environ['OPENBLAS_NUM_THREADS'], os.environ['OMP_NUM_THREADS'])")
    assert _run(code) == "False 1 1"


def test_a_users_own_setting_is_kept():
    code = "import pooler.cli, os; print(os.environ['OPENBLAS_NUM_THREADS'])"
    assert _run(code, OPENBLAS_NUM_THREADS="2") == "2"


def test_library_calls_limit_and_restore_blas_threads():
    # numpy loaded first (as in a notebook): the limit comes from threadpoolctl, only inside
    # the call, and the previous count is back afterwards.
    code = (
        "import numpy\n"
        "from threadpoolctl import threadpool_info, threadpool_limits\n"
        "from pooler._threads import one_blas_thread\n"
        "blas = lambda: [i['num_threads'] for i in threadpool_info() if i['user_api'] == 'blas']\n"
        "with threadpool_limits(2, user_api='blas'):\n"
        "    before = blas()\n"
        "    with one_blas_thread():\n"
        "        inside = blas()\n"
        "    after = blas()\n"
        "print(set(before), set(inside), set(after))\n")
    out = _run(code)
    before, inside, after = out.split("} {")
    assert inside == "1"
    assert before == "{2" and after == "2}"


def test_whole_job_runs_single_threaded(demo_path):
    from threadpoolctl import threadpool_info

    import pooler._threads as th
    seen = []
    real = th.one_blas_thread

    def spy():
        cm = real()

        class _CM:
            def __enter__(self):
                cm.__enter__()
                seen.append({i["num_threads"] for i in threadpool_info()
                             if i["user_api"] == "blas"})

            def __exit__(self, *exc):
                return cm.__exit__(*exc)
        return _CM()
    th.one_blas_thread = spy
    try:
        from pooler.pipeline import analyse
        analyse(demo_path)
    finally:
        th.one_blas_thread = real
    assert seen and all(s <= {1} for s in seen)
