"""The front end's thermal noise: its level (F·k·T0 in the capture's dBFS), whiteness, determinism and
block invariance, in the noise source and through the whole Receiver; summary and CLI in dBm."""

from __future__ import annotations

import json
import re
import math
import sys
from pathlib import Path

import numpy as np
import pytest
from scipy import signal

from sdrx.capture import open_writer
from sdrx.chain import design_chain
from sdrx.dsp.thermal import CHUNK, ThermalNoise, kt0_dbm_per_hz, thermal_density_dbfs_per_hz
from sdrx.errors import ParameterError

sys.path.insert(0, str(Path(__file__).parent))  # tests/helpers_*.py (pytest importlib mode)
from helpers_cli import run  # noqa: E402
from helpers_rx import am_station, iq_info, run_receiver  # noqa: E402

FS = 240e3
CENTER = 1.0e6
INFO = iq_info(FS, CENTER)
NOISY = {"frontend": {"full_scale_dbm": -20.0, "noise_figure_db": 10.0, "seed": 5}}


def test_kt0_is_minus_174_dbm_per_hz():
    # source: k = 1.380649e-23 J/K (SI, exact since 2019) and T0 = 290 K, the reference temperature of the
    # IEEE noise-factor definition; the trade rounds k·T0 to -174 dBm/Hz
    assert 10 * math.log10(1.380649e-23 * 290 * 1e3) == pytest.approx(kt0_dbm_per_hz(), abs=1e-12)
    assert kt0_dbm_per_hz() == pytest.approx(-174.0, abs=0.03)
    # F·k·T0 in dBFS: 10 dB noise figure, a full-scale carrier of -20 dBm -> -174 + 10 + 20 dBFS/Hz
    assert thermal_density_dbfs_per_hz(10.0, -20.0) == pytest.approx(-144.0, abs=0.03)


@pytest.mark.parametrize("kind", ["iq", "real"])
def test_density_and_whiteness_by_welch(kind):
    # reference library: scipy.signal.welch. Convention (as sdrx synth): noise in 1 Hz has the power of a
    # carrier of N dBFS, a carrier of amplitude A having power A² (I/Q, |x|²) or A²/2 (real cosine)
    n_db = -110.0
    x = ThermalNoise(n_db, FS, kind, seed=2, prefetch=False).take(0, 2 ** 19)
    if kind == "iq":
        f, p = signal.welch(x, FS, nperseg=1024, return_onesided=False)   # two-sided over fs: E|x|²/fs per Hz
        got = 10 * np.log10(p)
    else:
        f, p = signal.welch(x, FS, nperseg=1024)                           # one-sided over fs/2
        got = 10 * np.log10(2 * p[1:-1])                                   # power per Hz = A_n²/2
    assert np.median(got) == pytest.approx(n_db, abs=0.05)
    assert np.percentile(got, 95) - np.percentile(got, 5) < 1.0    # flat: Welch scatter of 2^19/1024 averages
    assert x.dtype == (np.complex64 if kind == "iq" else np.float32)


def test_noise_depends_only_on_seed_and_sample_index():
    a = ThermalNoise(-100.0, FS, "iq", seed=3)
    whole = a.take(0, 3 * CHUNK + 17)
    b = ThermalNoise(-100.0, FS, "iq", seed=3)
    parts, pos = [], 0
    for size in [1] * 50 + [7919] * 3 + [5 * CHUNK]:
        take = min(size, len(whole) - pos)
        parts.append(b.take(pos, take))
        pos += take
    assert np.array_equal(np.concatenate(parts), whole)
    # an excerpt starting part-way in gets the same noise as the whole capture there
    c = ThermalNoise(-100.0, FS, "iq", seed=3)
    assert np.array_equal(c.take(CHUNK + 1000, 40000), whole[CHUNK + 1000:CHUNK + 41000])
    assert not np.array_equal(ThermalNoise(-100.0, FS, "iq", seed=4).take(0, 100), whole[:100])
    for src in (a, b, c):
        src.close()


def test_receiver_with_noise_is_block_invariant_and_deterministic():
    d = design_chain(NOISY)
    x = am_station(1.0e6, -60.0, 0.3, 1000.0, FS, CENTER, int(0.06 * FS)).astype(np.complex64)
    whole, rx = run_receiver(d, INFO, 1.0e6, x)
    assert rx.noise is not None
    for block in (1, 7919, len(x) + 5):
        if block == 1:
            from sdrx.receiver import Receiver

            r1 = Receiver(d, INFO, 1.0e6)
            parts = [r1.process(x[i:i + 1]) for i in range(2000)] + [r1.process(x[2000:]), r1.flush()]
            got = np.concatenate(parts)
        else:
            got, _ = run_receiver(d, INFO, 1.0e6, x, block=block)
        assert np.array_equal(got, whole), block
    clean, rx0 = run_receiver(d, INFO, 1.0e6, x, thermal_noise=False)
    assert rx0.noise is None and not np.array_equal(clean, whole)


def test_noise_reaches_the_if_at_its_level():
    # a carrier of C dBFS with the noise of N dBFS/Hz: the carrier level the receiver reports stays C,
    # and the audio's S/N is what S/N = m²·(C/N0)/(2W) gives (checked in test_sensitivity); here: the
    # noise-only IF envelope has the Rayleigh mean sqrt(π/4 · N0 · B_n) for the chain's noise bandwidth
    d = design_chain(NOISY)
    n_db = thermal_density_dbfs_per_hz(10.0, -20.0)
    x = np.zeros(int(0.3 * FS), np.complex64)
    _, rx = run_receiver(d, INFO, 1.0e6, x, hold_db=0.0)
    f = np.linspace(-60e3, 60e3, 24001)
    h = d.rf_response(1e6 + f, 1e6) / d.rf_response(np.array([1e6]), 1e6)[0]
    bn = np.trapezoid(np.abs(h) ** 2, f)     # noise bandwidth of the IF, referred to the antenna
    # source: Rayleigh distribution of the envelope of narrow-band Gaussian noise, mean sigma·sqrt(π/2),
    # E|n|² = 2 sigma² = 10^(N/10)·B_n (Rice, "Mathematical analysis of random noise", BSTJ 1944-45)
    want = 20 * np.log10(math.sqrt(math.pi / 4 * 10 ** (n_db / 10) * bn))
    assert float(np.mean(rx.carrier_levels_dbfs())) == pytest.approx(want, abs=0.3)


def test_noise_figure_without_full_scale_is_refused():
    d = design_chain({"frontend": {"noise_figure_db": 6}})
    with pytest.raises(ParameterError, match=r"^frontend\.noise_figure_db: 6 dB needs the antenna power of full "
                                             r"scale .*--full-scale-dbm$"):
        run_receiver(d, INFO, 1.0e6, np.zeros(1000, np.complex64))
    # given for the capture, it is enough
    _, rx = run_receiver(d, INFO, 1.0e6, np.zeros(1000, np.complex64), full_scale_dbm=-30.0)
    assert rx.noise.density_dbfs_per_hz == pytest.approx(kt0_dbm_per_hz() + 6 + 30, abs=1e-9)


@pytest.fixture
def capture(tmp_path):
    x = am_station(1.0e6, -30.0, 0.3, 1000.0, FS, CENTER, int(0.1 * FS))
    path = tmp_path / "cap.sigmf-meta"
    with open_writer(path, fs=FS, kind="iq", datatype="cf32_le", center_hz=CENTER) as w:
        w.write(x.astype(np.complex64))
    return path


def test_cli_summary_in_dbm_beside_dbfs(tmp_path, capture, capsys):
    spec = tmp_path / "noisy.toml"
    spec.write_text("[frontend]\nfull_scale_dbm = -20\nnoise_figure_db = 10\n")
    s_json = tmp_path / "s.json"
    rc, out, err = run(["receive", capture, "--tune", "1M", "--chain", spec, "-o", tmp_path / "a.wav",
                        "--summary", s_json, "--quiet"], capsys)
    assert rc in (0, None), err
    s = json.loads(s_json.read_text())
    assert s["full_scale_dbm"] == -20.0
    assert s["carrier_dbm"]["mean"] == pytest.approx(s["carrier_dbfs"]["mean"] - 20.0, abs=1e-3)
    assert s["carrier_dbm"]["mean"] == pytest.approx(-50.0, abs=0.3)
    tn = s["thermal_noise"]
    assert tn["noise_figure_db"] == 10.0 and tn["density_dbm_per_hz"] == pytest.approx(-164.0, abs=0.03)
    assert tn["density_dbfs_per_hz"] == pytest.approx(-144.0, abs=0.03)
    assert "dBm" in out
    # --full-scale-dbm overrides the spec (a capture calibrated on its own): the carrier reads 10 dB higher
    rc, out, err = run(["receive", capture, "--tune", "1M", "--chain", spec, "-o", tmp_path / "b.wav",
                        "--summary", s_json, "--quiet", "--force", "--full-scale-dbm", "-10 dBm"], capsys)
    s2 = json.loads(s_json.read_text())
    assert s2["full_scale_dbm"] == -10.0
    assert s2["carrier_dbm"]["mean"] == pytest.approx(s["carrier_dbm"]["mean"] + 10.0, abs=0.01)
    # without a front end: no dBm, no noise
    rc, out, err = run(["receive", capture, "--tune", "1M", "-o", tmp_path / "c.wav", "--summary", s_json,
                        "--quiet", "--force"], capsys)
    s3 = json.loads(s_json.read_text())
    assert s3["full_scale_dbm"] is None and s3["carrier_dbm"] is None and s3["thermal_noise"] is None


@pytest.mark.parametrize("args, match", [
    (["--full-scale-dbm", "hot"], r"^sdrx: error: --full-scale-dbm: cannot read 'hot' as a power in dBm$"),
    (["--full-scale-dbm", "90"], r"^sdrx: error: --full-scale-dbm: '90' must be a power from -150 to 60 dBm$"),
    (["--chain", "NF"], r"^sdrx: error: frontend\.noise_figure_db: 10 dB needs the antenna power of full scale"),
])
def test_cli_bad_full_scale_exits_2_with_one_line(tmp_path, capture, capsys, args, match):
    if args[0] == "--chain":
        spec = tmp_path / "nf.toml"
        spec.write_text("[frontend]\nnoise_figure_db = 10\n")
        args = ["--chain", spec]
    out = tmp_path / "x.wav"
    rc, so, se = run(["receive", capture, "--tune", "1M", "-o", out, "--quiet"] + args, capsys)
    assert rc == 2
    lines = se.strip().splitlines()
    assert len(lines) == 1 and re.match(match, lines[0]), se
    assert not out.exists()
