"""An interrupted run leaves nothing under the final name and no temporary file behind."""

from __future__ import annotations

import signal
import subprocess
import sys
import time

import numpy as np
import pytest

from sdrx.capture import open_writer


@pytest.mark.parametrize("sig", [signal.SIGINT, signal.SIGTERM])
def test_interrupted_receive_leaves_no_partial_output(tmp_path, sig):
    cap = tmp_path / "long.sigmf-meta"
    rng = np.random.default_rng(5)
    fs = 2.4e6
    with open_writer(cap, fs=fs, kind="iq", datatype="ci16_le", center_hz=1.2e6) as w:
        for _ in range(40):   # 40 × 0.25 s: long enough to interrupt in the middle
            n = int(0.25 * fs)
            w.write((0.01 * (rng.standard_normal(n) + 1j * rng.standard_normal(n))).astype(np.complex64))
    out = tmp_path / "out" / "a.wav"
    out.parent.mkdir()
    p = subprocess.Popen([sys.executable, "-m", "sdrx", "receive", str(cap), "--tune", "1M", "--path", "exact",
                          "-o", str(out), "--quiet"], stdout=subprocess.PIPE, stderr=subprocess.PIPE)
    deadline = time.monotonic() + 60
    while not list(out.parent.glob("*.partial")) and time.monotonic() < deadline and p.poll() is None:
        time.sleep(0.02)
    assert p.poll() is None, "finished before it could be interrupted"
    time.sleep(0.3)
    p.send_signal(sig)
    _, err = p.communicate(timeout=60)
    assert p.returncode == 130
    assert b"Traceback" not in err
    assert list(out.parent.iterdir()) == []   # no final file, no temporary file
