"""sdrx band on a Dask LocalCluster of two worker processes on the loopback interface.

Each test starts and stops its own cluster (127.0.0.1 only) and is bounded in
time: the band run goes through the command line in a subprocess with a
timeout, the job runner through a watchdog thread.
"""

import subprocess
import sys
import threading

import pytest

from sdrx.errors import ParameterError
from sdrx.parallel import run_jobs

TIMEOUT_S = 240


def _where(x):
    import time

    from distributed import get_worker

    time.sleep(0.4)   # long enough that both workers get jobs
    return x * x, get_worker().address


def _fails(x):
    raise ParameterError(f"--stations {x}: a message from a worker")


def _bounded(fn):
    out = {}

    def target():
        try:
            out["value"] = fn()
        except BaseException as exc:   # handed to the test below
            out["error"] = exc

    t = threading.Thread(target=target, daemon=True)
    t.start()
    t.join(TIMEOUT_S)
    assert not t.is_alive(), f"Dask run did not finish within {TIMEOUT_S} s"
    if "error" in out:
        raise out["error"]
    return out["value"]


def test_two_local_workers_on_loopback():
    seen = []
    res = _bounded(lambda: run_jobs(_where, list(range(6)), workers=2, on_result=lambda i, r: seen.append(i)))
    assert [r[0] for r in res] == [x * x for x in range(6)]      # in job order
    addrs = {r[1] for r in res}
    assert len(addrs) == 2
    assert all(a.startswith("tcp://127.0.0.1:") for a in addrs)
    assert sorted(seen) == list(range(6))


def test_a_worker_error_keeps_its_type_and_message():
    with pytest.raises(ParameterError, match="a message from a worker"):
        _bounded(lambda: run_jobs(_fails, ["600k"], workers=1))


def test_band_on_two_workers_is_byte_identical(band_capture, tmp_path):
    local = tmp_path / "local"
    dist = tmp_path / "dist"
    base = [sys.executable, "-m", "sdrx", "band", str(band_capture), "--stations", "850k,1150k",
            "--segment", "3", "--duration", "7", "--quiet"]
    subprocess.run(base + ["-o", str(local)], check=True, timeout=TIMEOUT_S, capture_output=True)
    r = subprocess.run(base + ["-o", str(dist), "--workers", "2"], timeout=TIMEOUT_S, capture_output=True, text=True)
    assert r.returncode == 0, r.stderr
    assert "3 segment(s) on 2 local workers" in r.stdout
    files = sorted(str(p.relative_to(local)) for p in local.rglob("*") if p.is_file())
    assert files == sorted(str(p.relative_to(dist)) for p in dist.rglob("*") if p.is_file())
    for name in files:
        assert (local / name).read_bytes() == (dist / name).read_bytes(), name
    assert not list(dist.glob(".sdrx-band-parts-*"))   # the workers' parts are gone


def test_unreachable_scheduler_is_a_parameter_error():
    with pytest.raises(ParameterError, match=r"--scheduler tcp://127.0.0.1:9: cannot reach a Dask scheduler"):
        _bounded(lambda: run_jobs(abs, [1], scheduler="tcp://127.0.0.1:9", connect_timeout_s=1.0))
