"""The capture spectrogram: levels against the dBFS definition, segment invariance, `sdrx info --spectrogram`."""


import numpy as np
import pytest

from helpers_cli import run as cli
from sdrx.band.spectrogram import SpectrogramAccumulator, plan_spectrogram, spectrogram
from sdrx.capture import open_capture, open_writer

FS = 96e3


def _capture(tmp_path, x, kind="iq"):
    p = tmp_path / "c.sigmf-meta"
    with open_writer(p, fs=FS, kind=kind, datatype="cf32_le" if kind == "iq" else "rf32_le",
                     center_hz=1e6 if kind == "iq" else None) as w:
        w.write(x.astype(np.complex64 if kind == "iq" else np.float32))
    return open_capture(p)


@pytest.mark.parametrize("kind", ["iq", "real"])
def test_carrier_reads_its_level(tmp_path, kind):
    # a carrier of amplitude A on a bin reads 20·log10(A) dBFS; halfway between bins the Hann window
    # loses 1.42 dB (scalloping loss; Harris, Proc. IEEE 66 (1978), table 1)
    n = np.arange(int(FS))
    sp = plan_spectrogram(type("I", (), {"fs": FS, "kind": kind, "center_hz": 1e6})(), 0, len(n), 3e3)
    rbw = FS / sp.nfft
    f_on, f_half = 30 * 1e3 // rbw * rbw, (30 * 1e3 // rbw + 5.5) * rbw
    if kind == "iq":
        x = 0.1 * np.exp(2j * np.pi * f_on * n / FS) + 0.01 * np.exp(2j * np.pi * f_half * n / FS)
    else:
        x = 0.1 * np.cos(2 * np.pi * f_on * n / FS) + 0.01 * np.cos(2 * np.pi * f_half * n / FS)
    db = spectrogram(_capture(tmp_path, x, kind), sp)
    f = sp.freqs_hz - (1e6 if kind == "iq" else 0.0)
    on = db[:, np.argmin(np.abs(f - f_on))]
    near = db[:, np.abs(f - f_half) < rbw].max(axis=1)
    np.testing.assert_allclose(on, -20.0, atol=0.01)
    np.testing.assert_allclose(near, -40.0 - 1.42, atol=0.02)


def test_columns_do_not_depend_on_the_split(tmp_path):
    rng = np.random.default_rng(3)
    x = rng.standard_normal(int(2 * FS)) + 1j * rng.standard_normal(int(2 * FS))
    r = _capture(tmp_path, 0.01 * x)
    sp = plan_spectrogram(r.info, 0, len(x), 3e3, segment_samples=48000)
    whole = spectrogram(r, sp)
    data = r.read()
    parts = []
    for start in range(0, len(x), 48000):
        acc = SpectrogramAccumulator(sp, start, start + 48000)
        for b in range(start, start + 48000, 7919):   # blocks of a prime size
            acc.feed(data[b:min(b + 7919, start + 48000)], b)
        parts.append(acc.db)
    np.testing.assert_array_equal(np.concatenate(parts), whole)


def test_info_draws_the_spectrogram(band_capture, tmp_path, capsys):
    png = tmp_path / "s.png"
    rc, out, err = cli(["info", band_capture, "--spectrogram", png, "--quiet", "--duration", "2"], capsys)
    assert rc == 0 and "carriers  4" in out
    first = png.read_bytes()
    assert first[:8] == b"\x89PNG\r\n\x1a\n" and len(first) > 20000
    rc, _, err = cli(["info", band_capture, "--spectrogram", png, "--quiet", "--duration", "2"], capsys)
    assert rc == 2 and err == f"sdrx: error: --spectrogram {png}: exists already; pass --force to replace it\n"
    rc, _, _ = cli(["info", band_capture, "--spectrogram", png, "--quiet", "--duration", "2", "--force"], capsys)
    assert rc == 0 and png.read_bytes() == first     # byte-identical rerun
    rc, _, err = cli(["info", band_capture, "--spectrogram", tmp_path / "s.jpg", "--quiet"], capsys)
    assert rc == 2 and "name a .png file" in err and err.count("\n") == 1


@pytest.mark.parametrize("kind", ["iq", "real"])
def test_many_columns_at_once_equal_one_at_a_time(tmp_path, kind):
    # consistency check: a block that holds many columns goes through one FFT call for all of them;
    # blocks shorter than a column go one column at a time. Same bits, the excerpt's short last column
    # (2 of 3 frames here) too.
    rng = np.random.default_rng(5)
    n = 151 * 960 + 600
    x = rng.standard_normal(n) + (1j * rng.standard_normal(n) if kind == "iq" else 0.0)
    r = _capture(tmp_path, 0.01 * x, kind)
    sp = plan_spectrogram(r.info, 0, n, 3e3)
    assert (sp.column, sp.frames, sp.frames_in(sp.n_columns - 1)) == (960, 3, 2)
    data = r.read()
    whole = SpectrogramAccumulator(sp, 0, n)
    whole.feed(data, 0)
    small = SpectrogramAccumulator(sp, 0, n)
    for b in range(0, n, 997):
        assert not small.complete
        small.feed(data[b:b + 997], b)
    assert whole.complete and small.complete
    np.testing.assert_array_equal(whole.db, small.db)
