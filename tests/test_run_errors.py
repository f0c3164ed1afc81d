"""An error part-way through a run stops the worker threads and writes nothing."""

from __future__ import annotations

import threading

import numpy as np
import pytest

from sdrx.capture import open_writer
from sdrx.errors import CaptureError
from sdrx.run import receive


@pytest.mark.parametrize("path", ["fast", "exact"])
def test_a_bad_sample_mid_run_stops_threads_and_leaves_no_output(tmp_path, path):
    cap = tmp_path / "bad.sigmf-meta"
    fs = 240e3
    x = (0.01 * np.exp(2j * np.pi * 1e3 * np.arange(int(2 * fs)) / fs)).astype(np.complex64)
    with open_writer(cap, fs=fs, kind="iq", datatype="cf32_le", center_hz=1.0e6) as w:
        w.write(x)
    # a NaN far enough in that blocks have already gone through the chain (the writer refuses to write one)
    data = cap.with_suffix(".sigmf-data")
    raw = np.fromfile(data, dtype="<f4")
    raw[2 * int(1.5 * fs)] = np.nan
    raw.tofile(data)
    before = threading.active_count()
    out = tmp_path / "out.wav"
    with pytest.raises(CaptureError, match=r"not finite|NaN"):
        receive(cap, 1.0e6, "medium", out, path=path, block_size=1 << 15)
    assert not out.exists() and not list(tmp_path.glob("*.partial"))
    assert threading.active_count() == before
