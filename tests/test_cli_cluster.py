"""The command on a real dask cluster: a scheduler and a worker as their own processes."""

from __future__ import annotations

import os
import shutil
import socket
import subprocess
import sys
import time
from pathlib import Path

import numpy as np
import pytest

from stimplan.cli import main
from stimplan.present.export import load_export

from .scenarios import gui_sequence

DASK = Path(sys.executable).with_name("dask")


def _free_port() -> int:
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        return s.getsockname()[1]


def _wait_for_port(port: int, timeout_s: float = 60.0) -> None:
    end = time.monotonic() + timeout_s
    while time.monotonic() < end:
        with socket.socket() as s:
            if s.connect_ex(("127.0.0.1", port)) == 0:
                return
        time.sleep(0.2)
    raise TimeoutError(f"no scheduler on port {port}")


@pytest.fixture
def cluster(tmp_path):
    """``dask scheduler`` and one ``dask worker`` (two threads), as subprocesses."""
    assert DASK.exists() or shutil.which("dask"), "the test set-up installs distributed"
    exe = str(DASK) if DASK.exists() else shutil.which("dask")
    port = _free_port()
    address = f"tcp://127.0.0.1:{port}"
    env = {**os.environ, "PYTHONPATH": os.pathsep.join(sys.path)}
    log = open(tmp_path / "cluster.log", "w")
    procs = [
        subprocess.Popen(
            [exe, "scheduler", "--host", "127.0.0.1", "--port", str(port), "--no-dashboard"],
            stdout=log,
            stderr=log,
            env=env,
        )
    ]
    try:
        _wait_for_port(port)
        procs.append(
            subprocess.Popen(
                [exe, "worker", address, "--nthreads", "2", "--no-dashboard"],
                stdout=log,
                stderr=log,
                env=env,
            )
        )
        from distributed import Client

        with Client(address, timeout="30s") as client:
            client.wait_for_workers(1, timeout=60)
        yield address
    finally:
        for p in reversed(procs):
            p.terminate()
        for p in procs:
            try:
                p.wait(timeout=20)
            except subprocess.TimeoutExpired:
                p.kill()
        log.close()


def test_export_on_a_cluster_writes_the_stack_of_a_serial_export(cluster, tmp_path, capsys):
    # common practice (reproducible from a seed): where a hologram is computed does not
    # change it; the cluster's stack equals the serial one level for level
    seq = tmp_path / "seq.toml"
    seq.write_text(gui_sequence(1.0))
    serial, remote = tmp_path / "serial", tmp_path / "remote"
    assert main(["export", str(seq), "-o", str(serial), "--quiet", "--scheduler", "serial"]) == 0
    assert main(["export", str(seq), "-o", str(remote), "--quiet", "--scheduler", cluster]) == 0
    a, b = load_export(serial), load_export(remote)
    assert a.grey.shape == b.grey.shape and a.grey.shape[0] >= 2
    assert np.array_equal(a.grey, b.grey)
    assert a.timeline == b.timeline
    capsys.readouterr()


def test_a_scheduler_that_is_not_running_is_a_clear_error(tmp_path, capsys):
    seq = tmp_path / "seq.toml"
    seq.write_text(gui_sequence(1.0))
    address = f"tcp://127.0.0.1:{_free_port()}"
    assert main(["check", str(seq), "--quiet", "--scheduler", address]) == 1
    err = capsys.readouterr().err
    assert "scheduler" in err and address in err
