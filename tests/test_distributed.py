"""Distributed runs on a real local Dask cluster (scheduler and two workers on loopback) equal the serial run."""

from __future__ import annotations

import json
import os
import signal
import subprocess
import sys
import threading
import time

import pytest

from hte.cache import WeightCache
from hte.lattice_file import load_lattice
from hte.models import build_model
from hte.series import normalise
from hte.expansion import expand_lattice

pytest.importorskip("distributed")


@pytest.fixture
def local_cluster(tmp_path):
    """`dask scheduler` and two `dask worker` processes on 127.0.0.1; yields (address, worker processes)."""
    scheduler_file = tmp_path / "scheduler.json"
    env = dict(os.environ, PYTHONWARNINGS="ignore", DASK_DISTRIBUTED__WORKER__DAEMON="False")
    procs = [subprocess.Popen([sys.executable, "-m", "distributed.cli.dask_scheduler", "--host", "127.0.0.1",
                               "--port", "0", "--no-dashboard", "--scheduler-file", str(scheduler_file)],
                              stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL, env=env)]
    try:
        deadline = time.time() + 60
        while not scheduler_file.exists() and time.time() < deadline:
            time.sleep(0.2)
        address = json.loads(scheduler_file.read_text())["address"]
        workers = []
        for _ in range(2):
            workers.append(subprocess.Popen(
                [sys.executable, "-m", "distributed.cli.dask_worker", address, "--nworkers", "1", "--nthreads", "1",
                 "--no-dashboard", "--host", "127.0.0.1"],
                stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL, env=env))
        procs += workers
        from distributed import Client

        with Client(address, timeout=60) as client:
            client.wait_for_workers(2, timeout=120)
        yield address, workers
    finally:
        for p in procs:
            if p.poll() is None:
                p.send_signal(signal.SIGTERM)
        for p in procs:
            try:
                p.wait(timeout=20)
            except subprocess.TimeoutExpired:
                p.kill()


def test_distributed_run_gives_bit_identical_exact_coefficients(local_cluster, tmp_path):
    address, _ = local_cluster
    spec = load_lattice("kagome")
    model = build_model(spec)
    serial = normalise(expand_lattice(spec, model, 6), lattice=spec, model=model).to_json_dict()
    distributed = normalise(expand_lattice(spec, model, 6, scheduler=address), lattice=spec,
                            model=model).to_json_dict()
    assert distributed["series"] == serial["series"]


def test_killed_worker_does_not_lose_or_duplicate_weights(local_cluster, tmp_path):
    address, workers = local_cluster
    spec = load_lattice("square")
    model = build_model(spec, couplings={"J2": "1/2"})
    cache = WeightCache(tmp_path / "cache")

    def kill_one_worker_soon():
        time.sleep(1.5)
        workers[0].kill()

    killer = threading.Thread(target=kill_one_worker_soon)
    killer.start()
    result = expand_lattice(spec, model, 6, scheduler=address, cache=cache)
    killer.join()
    reference = expand_lattice(spec, model, 6)
    assert result.terms == reference.terms
    stored = len(cache)
    # every computed weight is stored once; a rerun computes nothing new
    again = expand_lattice(spec, model, 6, cache=cache)
    assert again.stats["cluster_series_computed"] == 0
    assert len(cache) == stored
    cache.close()
