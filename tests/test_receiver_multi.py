"""Many stations from one channelizer pass: the bank and the multi-station receiver against the one-station path.

These are consistency checks against sdrx's own single-station code (the
receiver the rest of the suite checks against outside references): a station
cut out by the shared bank, with its own IF stages and back end, must give the
same samples as that station received alone: identical for one station, and
to float rounding for many (their shared pre-roll runs from the longest of
their pre-rolls and holds the carriers near every station; see
sdrx/receiver/multi.py), which must stay 100 dB below the signal.
"""

import numpy as np
import pytest

from helpers_rx import am_station, carrier, complex_noise, iq_info, run_receiver
from sdrx.chain import design_chain
from sdrx.dsp.channelbank import ChannelBank
from sdrx.dsp.channelizer import ChannelSpec, Channelizer, plan_channelizer
from sdrx.errors import ParameterError
from sdrx.receiver.multi import MultiReceiver


def _below_signal_db(got, want):
    """The difference's power against the signal's, dB."""
    return 10 * np.log10(np.sum((got - want) ** 2) / np.sum(want ** 2) + 1e-300)

FS, CENTER = 480e3, 1.0e6


@pytest.fixture(scope="module")
def band_signal():
    rng = np.random.default_rng(4)
    n = int(0.6 * FS)
    x = (am_station(0.93e6, -20, 0.8, 1000, FS, CENTER, n) + am_station(1.01e6, -40, 0.5, 400, FS, CENTER, n)
         + am_station(1.15e6, -30, 0.6, 2000, FS, CENTER, n) + complex_noise(rng, 1e-7, n))
    return x.astype(np.complex64)


@pytest.mark.parametrize("is_complex", [True, False])
@pytest.mark.parametrize("block", [1, 997, 10**6])
def test_bank_equals_each_channelizer(is_complex, block):
    plan = plan_channelizer(240e3, 48e3)
    specs = [ChannelSpec(10e3, lambda d: 1 + 1e-6 * d), ChannelSpec(37.3e3), ChannelSpec(61e3, scale=0.5j)]
    if is_complex:
        specs.append(ChannelSpec(-50e3))
    rng = np.random.default_rng(1)
    n = 7000 if block == 1 else 40000
    x = rng.standard_normal(n) + (1j * rng.standard_normal(n) if is_complex else 0)
    ones = [Channelizer(plan, is_complex, [s], first_sample=123457) for s in specs]
    bank = ChannelBank(plan, is_complex, [c.tables[0] for c in ones], first_sample=123457, batch=3)
    parts = [bank.process(x[i:i + block]) for i in range(0, n, block)] + [bank.flush()]
    got = np.concatenate(parts, axis=1)
    for i, c in enumerate(ones):
        want = np.concatenate([c.process(x)[0], c.flush()[0]])
        np.testing.assert_array_equal(got[i], want)


STATIONS = [("medium", 0.93e6), ("narrow", 1.01e6), ("wide", 1.15e6), ("medium", 1.01e6),
            ({"detector": {"kind": "diode", "rc_us": 60}}, 0.93e6),
            ({"detector": {"kind": "synchronous"}, "injection": "low"}, 1.01e6),
            ({"audio": {"rate": 44100}}, 1.15e6)]


@pytest.mark.parametrize("block", [None, 7919])
def test_each_station_equals_its_own_receiver(band_signal, block):
    info = iq_info(FS, CENTER)
    st = [(design_chain(c), f) for c, f in STATIONS]
    mr = MultiReceiver(st, info)
    assert len(mr.groups) == 2   # 48 kHz and 44.1 kHz audio: two channel rates, two banks
    x = band_signal
    if block is None:
        parts = [mr.process(x)]
    else:
        parts = [mr.process(x[i:i + block]) for i in range(0, len(x), block)]
    parts.append(mr.flush())
    for i, ((d, f), rx) in enumerate(zip(st, mr.stations)):
        got = np.concatenate([p[i] for p in parts])
        want, ref = run_receiver(d, info, f, x)
        assert len(got) == len(want)
        # measured -127 to -136 dB (float32 capture samples through different FFT segment grids)
        assert _below_signal_db(got, want) < -115.0, i
        assert rx.warnings == ref.warnings
        s, r = rx.stats(), ref.stats()
        assert s["agc_gain_db"]["min"] == pytest.approx(r["agc_gain_db"]["min"], abs=1e-6)
        assert s["agc_gain_db"]["max"] == pytest.approx(r["agc_gain_db"]["max"], abs=1e-6)
        # the level meter sums 10 ms windows block by block: the same to float rounding (measured 4e-8 dB)
        assert s["carrier_dbfs"]["mean"] == pytest.approx(r["carrier_dbfs"]["mean"], abs=1e-6)


def test_excerpt_start_keeps_the_grid(band_signal):
    """A multi-station receiver started part-way in equals single receivers started there."""
    info = iq_info(FS, CENTER)
    first = 48000
    st = [(design_chain("medium"), 0.93e6), (design_chain("narrow"), 1.15e6)]
    mr = MultiReceiver(st, info, first_sample=first)
    x = band_signal[first:]
    out = [np.concatenate([a, b]) for a, b in zip(mr.process(x), mr.flush())]
    for (d, f), got in zip(st, out):
        want, _ = run_receiver(d, info, f, x, first_sample=first)
        assert _below_signal_db(got, want) < -115.0


def test_one_station_alone_equals_its_receiver_exactly(band_signal):
    info = iq_info(FS, CENTER)
    d = design_chain("narrow")
    mr = MultiReceiver([(d, 1.01e6)], info)
    got = np.concatenate([mr.process(band_signal)[0], mr.flush()[0]])
    want, _ = run_receiver(d, info, 1.01e6, band_signal)
    np.testing.assert_array_equal(got, want)


def test_statistics_restart_at_the_mark():
    """The AGC gain range counts only from the mark: a loud first half does not enter it."""
    info = iq_info(FS, CENTER)
    n = int(0.4 * FS)
    x = np.concatenate([carrier(0.93e6, -10, FS, CENTER, n), carrier(0.93e6, -50, FS, CENTER, n, start=n)])
    d = design_chain("medium")
    whole = MultiReceiver([(d, 0.93e6)], info)
    marked = MultiReceiver([(d, 0.93e6)], info)
    marked.restart_statistics_at(n + int(0.2 * FS))
    for mr in (whole, marked):
        mr.process(x.astype(np.complex64))
        mr.flush()
    g_all = whole.stations[0].stats()["agc_gain_db"]
    g_late = marked.stations[0].stats()["agc_gain_db"]
    # -10 dBFS holds the gain 40 dB below what -50 dBFS needs; 0.2 s after the step (release 300 ms)
    # the gain is still rising, about 20 dB above its loud-carrier value
    assert g_late["min"] > g_all["min"] + 15
    assert g_late["max"] == pytest.approx(g_all["max"])


def test_station_outside_the_capture_is_refused():
    with pytest.raises(ParameterError, match="outside the capture's band"):
        MultiReceiver([(design_chain("medium"), 2.0e6)], iq_info(FS, CENTER))


def test_the_blanker_runs_once_for_every_station():
    # the same [blanker] for all stations: one blanker on the capture ahead of the bank, as receive has
    rng = np.random.default_rng(8)
    n = int(0.5 * FS)
    info = iq_info(FS, CENTER)
    x = am_station(0.93e6, -30, 0.5, 1000, FS, CENTER, n) + complex_noise(rng, 1e-8, n)
    x[rng.integers(1000, n - 1000, 12)] += 0.5            # impulses, +24 dB over the carrier
    d = design_chain({"blanker": {"enabled": True}})
    mr = MultiReceiver([(d, 0.93e6), (d, 1.01e6)], info)
    out = [np.concatenate([a, b]) for a, b in zip(mr.process(x.astype(np.complex64)), mr.flush())]
    assert mr.blanker.pulses == 12
    want, _ = run_receiver(d, info, 0.93e6, x)
    assert _below_signal_db(out[0], want) < -105.0     # measured -113 dB (the bound: 100 dB)
    with pytest.raises(ParameterError, match=r"\[blanker\] differ"):
        MultiReceiver([(d, 0.93e6), (design_chain("medium"), 1.01e6)], info)


def test_stations_of_one_chain_run_together_and_equal_each_alone(band_signal):
    """Stations of one chain run their back ends as one (sdrx/receiver/backend_batch.py): the same
    audio, AGC range and levels as each station's back end stepping alone, and as its own receiver."""
    info = iq_info(FS, CENTER)
    d = design_chain("medium")
    freqs = [0.93e6, 1.01e6, 1.15e6, 0.97e6]
    together, alone = MultiReceiver([(d, f) for f in freqs], info), MultiReceiver([(d, f) for f in freqs], info)
    alone._back_ends = lambda n_in, us: [alone._feed(i, n_in, u) for i, u in enumerate(us)]
    x = band_signal
    outs = []
    for mr in (together, alone):
        parts = [mr.process(x[i:i + 7919]) for i in range(0, len(x), 7919)] + [mr.flush()]
        outs.append([np.concatenate([p[i] for p in parts]) for i in range(len(freqs))])
    for i, f in enumerate(freqs):
        a, b = together.stations[i], alone.stations[i]
        # numpy's log10 and 10**x against Python's on each gain step: equal here (the same C library)
        np.testing.assert_array_equal(outs[0][i], outs[1][i])
        assert a.stats() == b.stats()
        assert a.backend.meter.depths == b.backend.meter.depths
        want, _ = run_receiver(d, info, f, x)
        assert _below_signal_db(outs[0][i], want) < -115.0, i


def test_the_batched_back_end_runs_the_batch(monkeypatch):
    """The stations of one chain do share the batched path once their AGCs have settled (not all alone)."""
    from sdrx.receiver import backend_batch

    info = iq_info(FS, CENTER)
    d = design_chain("medium")
    mr = MultiReceiver([(d, 0.93e6), (d, 1.01e6)], info)
    seen = []
    orig = backend_batch._alike
    monkeypatch.setattr(backend_batch, "_alike", lambda bs, u: seen.append(len(bs)) or orig(bs, u))
    x = carrier(0.93e6, -20, FS, CENTER, int(0.5 * FS)).astype(np.complex64)
    mr.process(x)
    mr.flush()
    assert seen and set(seen) == {2}
