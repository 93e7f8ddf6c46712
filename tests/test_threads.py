"""The thread count: never more than the cores this process may use, overridable, the same for torch and BLAS."""

from __future__ import annotations

import json
import os
import subprocess
import sys
from pathlib import Path

import pytest

from inspector import threads

ROOT = Path(__file__).resolve().parent.parent


def test_affinity_and_cgroup_quota_cap_the_count():
    """Reference: Linux sched_getaffinity(2) (the CPUs a process may run on) and the cgroup CPU controller
    (quota / period = cores' worth of time per period, rounded up to whole threads); common practice, no source."""
    assert threads.available_cores(affinity=lambda: 8, quota=lambda: 3) == 3
    assert threads.available_cores(affinity=lambda: 2, quota=lambda: None) == 2
    assert threads.available_cores(affinity=lambda: 2, quota=lambda: 6) == 2
    assert threads.choose_threads(environ={}, cores=lambda: 3) == threads.ThreadChoice(
        3, "available cores", 3
    )


@pytest.mark.parametrize(
    ("files", "expected"),
    [
        ({"cpu.max": "150000 100000\n"}, 2),
        ({"cpu.max": "max 100000\n"}, None),
        ({"cpu.max": "50000 100000\n"}, 1),
        ({"cpu/cpu.cfs_quota_us": "-1\n", "cpu/cpu.cfs_period_us": "100000\n"}, None),
        ({"cpu/cpu.cfs_quota_us": "250000\n", "cpu/cpu.cfs_period_us": "100000\n"}, 3),
        ({}, None),
    ],
)
def test_cgroup_quota_files_v1_and_v2(tmp_path, files, expected):
    """Reference: the Linux kernel's cgroup documentation: cgroup v2 ``cpu.max`` holds "$MAX $PERIOD" or
    "max $PERIOD"; cgroup v1 ``cpu.cfs_quota_us`` is -1 when unlimited (Documentation/scheduler/sched-bwc.rst)."""
    for name, text in files.items():
        (tmp_path / name).parent.mkdir(parents=True, exist_ok=True)
        (tmp_path / name).write_text(text)
    assert threads.cgroup_quota_cores(tmp_path) == expected


def test_flag_beats_environment_beats_cores():
    """--threads wins over HEADCOUNT_THREADS, which wins over the available cores; bad values are refused.
    Reference: the tracker issue's rule (an option and an environment variable override); common practice."""
    env = {threads.ENV_VAR: "3"}
    assert threads.choose_threads(5, env, cores=lambda: 2).count == 5
    assert threads.choose_threads(None, env, cores=lambda: 2) == threads.ThreadChoice(3, threads.ENV_VAR, 2)
    assert threads.choose_threads(None, {threads.ENV_VAR: " "}, cores=lambda: 2).count == 2
    for bad in ({threads.ENV_VAR: "two"}, {threads.ENV_VAR: "0"}):
        with pytest.raises(ValueError):
            threads.choose_threads(None, bad, cores=lambda: 2)
    with pytest.raises(ValueError):
        threads.choose_threads(0, {}, cores=lambda: 2)


_PROBE = r"""
import json, os, sys
from inspector import threads
choice = threads.configure(None if len(sys.argv) < 2 else int(sys.argv[1]))
import numpy, torch
from threadpoolctl import threadpool_info
blas = sorted({p["num_threads"] for p in threadpool_info() if p["user_api"] == "blas"})
print(json.dumps({"count": choice.count, "cores": choice.cores, "torch": torch.get_num_threads(), "blas": blas}))
"""


def _probe(*args: str, cpus: set[int] | None = None, env: dict | None = None) -> dict:
    def pin() -> None:
        if cpus is not None:
            os.sched_setaffinity(0, cpus)

    done = subprocess.run(
        [sys.executable, "-c", _PROBE, *args],
        cwd=ROOT,
        env={**os.environ, **(env or {})},
        capture_output=True,
        text=True,
        timeout=120,
        preexec_fn=pin,
    )
    assert done.returncode == 0, done.stderr[-2000:]
    return json.loads(done.stdout.strip().splitlines()[-1])


@pytest.mark.skipif(not hasattr(os, "sched_setaffinity"), reason="needs Linux CPU affinity")
def test_a_process_pinned_to_one_core_uses_one_thread_in_torch_and_blas():
    """A child pinned to one CPU (as ``taskset -c 0`` would) chooses 1 thread; torch and numpy's BLAS both use it;
    HEADCOUNT_THREADS and --threads override it. Reference: sched_setaffinity(2); torch.get_num_threads and
    threadpoolctl.threadpool_info report what the libraries actually use."""
    env = {threads.ENV_VAR: ""}
    pinned = _probe(cpus={sorted(os.sched_getaffinity(0))[0]}, env=env)
    assert pinned["cores"] == 1 and pinned["count"] == 1 and pinned["torch"] == 1
    assert pinned["blas"] in ([], [1])
    assert _probe(env={threads.ENV_VAR: "1"})["torch"] == 1
    assert _probe("1", env={threads.ENV_VAR: "2"})["count"] == 1


def test_help_loads_no_model_library_and_states_the_thread_rule():
    """`headcount --help` and `headcount analyze --help` import neither torch nor transformers, and say how the
    thread count is chosen. Reference: Python's sys.modules (every imported module is listed there)."""
    code = (
        "import contextlib, io, sys\n"
        "from ui.launcher import main\n"
        "for args in (['--help'], ['analyze', '--help'], ['corpus', '--help'], ['explain', '--help']):\n"
        "    out = io.StringIO()\n"
        "    with contextlib.redirect_stdout(out), contextlib.suppress(SystemExit):\n"
        "        main(args)\n"
        "    assert 'HEADCOUNT_THREADS' in out.getvalue() and 'tokenizers' in out.getvalue(), args\n"
        "    if args != ['--help']:\n"
        "        assert '--threads' in out.getvalue(), args\n"
        "print(sorted(m for m in ('torch', 'transformers', 'matplotlib') if m in sys.modules))\n"
    )
    done = subprocess.run([sys.executable, "-c", code], cwd=ROOT, capture_output=True, text=True, timeout=120)
    assert done.returncode == 0, done.stderr[-2000:]
    assert done.stdout.strip() == "[]"


def test_a_bad_thread_count_is_one_line_and_status_2(tmp_path):
    """Reference: the project's CLI convention (user errors: one stderr line, exit status 2)."""
    from inspector.cli.main import main

    os.environ.pop(threads.ENV_VAR, None)
    assert main(["analyze", str(tmp_path), "--text", "hi", "--threads", "0"]) == 2
