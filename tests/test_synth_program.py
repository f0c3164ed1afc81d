"""Program generators: block invariance, peak normalisation, band limits, WAV programs."""

from __future__ import annotations

import numpy as np
import pytest
import soundfile as sf
from scipy import signal

from sdrx.errors import ParameterError
from sdrx.synth import make_program, parse_program
from sdrx.synth.program import CALIBRATION_S

FS = 16000.0

SPECS = [
    {"kind": "tone", "frequency": "1k"},
    {"kind": "tones", "frequencies": ["400", "1k", "2.5k"], "levels_db": [0, -3, -6]},
    {"kind": "sweep", "start": "200", "stop": "4k", "period_s": 0.5},
    {"kind": "sweep", "start": "100", "stop": "4k", "period_s": "300ms", "law": "log"},
    {"kind": "noise", "low": "300", "high": "3k"},
    {"kind": "speech"},
    {"kind": "music", "tempo_bpm": 140},
]


def _read_split(src, sizes):
    return np.concatenate([src.read(s) for s in sizes])


@pytest.mark.parametrize("spec", SPECS, ids=lambda s: s["kind"] + s.get("law", ""))
def test_reads_of_any_size_give_the_same_samples(spec):
    n = 20011
    whole = make_program(spec, FS, 11).read(n)
    ones = make_program(spec, FS, 11)
    first = np.array([ones.read(1)[0] for _ in range(50)])
    parts = _read_split(make_program(spec, FS, 11), [7919, 3, 12089])
    big = make_program(spec, FS, 11).read(n + 5000)[:n]
    assert np.array_equal(first, whole[:50])
    assert np.array_equal(parts, whole)
    assert np.array_equal(big, whole)


@pytest.mark.parametrize("spec", SPECS, ids=lambda s: s["kind"] + s.get("law", ""))
def test_program_stays_in_unit_range_with_peak_one(spec):
    # a peak of exactly 1 makes the station's depth m its peak modulation depth
    n = int(CALIBRATION_S * FS)
    x = make_program(spec, FS, 3).read(n)
    assert np.max(np.abs(x)) <= 1.0
    assert np.max(np.abs(x)) == pytest.approx(1.0, abs=1e-6)


def test_same_seed_same_program_other_seed_other_program():
    a = make_program({"kind": "speech"}, FS, 1).read(16000)
    b = make_program({"kind": "speech"}, FS, 1).read(16000)
    c = make_program({"kind": "speech"}, FS, 2).read(16000)
    assert np.array_equal(a, b)
    assert not np.allclose(a, c)


def test_tones_follow_the_formula():
    spec = {"kind": "tones", "frequencies": [400, 1000], "levels_db": [0, -6]}
    x = make_program(spec, FS, 0).read(4000)
    n = np.arange(4000)
    a1, a2 = 1.0, 10 ** (-6 / 20)
    ref = (a1 * np.cos(2 * np.pi * 400 * n / FS) + a2 * np.cos(2 * np.pi * 1000 * n / FS)) / (a1 + a2)
    np.testing.assert_allclose(x, ref, atol=1e-12)


def test_linear_sweep_instantaneous_frequency():
    # instantaneous frequency of a chirp = d(phase)/dt / 2π, measured from the analytic signal
    x = make_program({"kind": "sweep", "start": 500, "stop": 3500, "period_s": 1.0}, FS, 0).read(16000)
    z = signal.hilbert(x)
    f_inst = np.diff(np.unwrap(np.angle(z))) * FS / (2 * np.pi)
    t = (np.arange(f_inst.size) + 0.5) / FS
    mid = slice(1600, 14400)  # away from the analytic-signal edge effects
    np.testing.assert_allclose(f_inst[mid], 500 + 3000 * t[mid], atol=0.2)   # measured deviation 0.015 Hz


@pytest.mark.parametrize("spec", [{"kind": "noise"}, {"kind": "speech"}, {"kind": "music"}],
                         ids=lambda s: s["kind"])
def test_random_programs_are_band_limited_to_broadcast_audio(spec):
    # source: ITU-R BS.639 (DSB emission width = 2 x audio bandwidth; 4.5 kHz audio in a 9 kHz channel)
    x = make_program(spec, FS, 5).read(int(4 * FS))
    f, pxx = signal.welch(x, fs=FS, nperseg=2048)
    inband = pxx[f <= 4500].sum()
    beyond = pxx[f >= 5625].sum()  # elliptic stop band edge 1.25 x 4.5 kHz
    assert 10 * np.log10(beyond / inband) < -50


def _bursts_per_second(x, seconds):
    frame = int(0.02 * FS)
    e = np.sqrt(np.mean(x[: x.size // frame * frame].reshape(-1, frame) ** 2, axis=1))
    loud = e > 0.1 * e.max()
    return np.count_nonzero(loud[1:] & ~loud[:-1]) / seconds, np.mean(e < 0.01 * e.max())


def test_speech_has_pauses_and_syllable_rhythm():
    seconds = 8
    fast, quiet = _bursts_per_second(make_program({"kind": "speech", "syllable_rate": 4}, FS, 9).read(int(seconds * FS)), seconds)
    slow, _ = _bursts_per_second(make_program({"kind": "speech", "syllable_rate": 2}, FS, 9).read(int(seconds * FS)), seconds)
    assert 0.1 < quiet < 0.5  # silences between phrases
    assert 3.0 <= fast <= 6.0  # about 4 syllables a second, fewer across pauses, some consonant bursts
    assert slow < fast


def test_music_has_notes_on_the_equal_tempered_scale():
    x = make_program({"kind": "music"}, FS, 4).read(int(8 * FS))
    f, pxx = signal.welch(x, fs=FS, nperseg=8192)
    peaks, _ = signal.find_peaks(pxx, height=pxx.max() * 0.05)
    semis = 12 * np.log2(f[peaks] / 440.0)
    # harmonics 1, 2, 4 of tempered notes fall on the grid; 3rd/5th harmonics lie within 0.14 semitone
    # source: equal temperament, f = 440 * 2**(n/12)
    assert np.mean(np.abs(semis - np.round(semis)) < 0.2) > 0.7


def test_wav_program_is_resampled_and_normalised(tmp_path):
    fw = 44100
    t = np.arange(int(1.5 * fw)) / fw
    path = tmp_path / "tone.wav"
    sf.write(path, 0.25 * np.sin(2 * np.pi * 700 * t), fw, subtype="FLOAT")
    spec = parse_program({"kind": "wav", "path": "tone.wav", "loop": False}, base_dir=tmp_path)
    src = make_program(spec, FS, 0)
    y = src.read(int(1.5 * FS))
    assert np.max(np.abs(y)) == pytest.approx(1.0, abs=1e-9)
    n = np.arange(y.size) / FS
    mid = slice(4000, 20000)
    # least-squares fit of a 700 Hz sinusoid: amplitude ~1, residual small
    basis = np.column_stack([np.sin(2 * np.pi * 700 * n[mid]), np.cos(2 * np.pi * 700 * n[mid])])
    coef, res, *_ = np.linalg.lstsq(basis, y[mid], rcond=None)
    assert np.hypot(*coef) == pytest.approx(1.0, rel=2e-3)
    assert np.sqrt(res[0] / y[mid].size) < 1e-3
    assert np.max(np.abs(src.read(2000)[800:])) < 1e-6  # silence (filter tail only) after the end, no loop
    again = _read_split(make_program(spec, FS, 0), [1, 5000, 18999])
    assert np.array_equal(again, y)


def test_wav_program_loops_and_mixes_channels(tmp_path):
    fw = 8000
    t = np.arange(4000) / fw
    stereo = np.column_stack([0.5 * np.sin(2 * np.pi * 500 * t), 0.5 * np.sin(2 * np.pi * 500 * t)])
    sf.write(tmp_path / "s.wav", stereo, fw, subtype="PCM_16")
    src = make_program({"kind": "wav", "path": str(tmp_path / "s.wav")}, FS, 0)
    y = src.read(int(2.5 * FS))
    assert np.sqrt(np.mean(y[int(1.2 * FS):int(2.2 * FS)] ** 2)) == pytest.approx(np.sqrt(0.5), rel=0.02)


def test_truth_program_dict_regenerates_the_program():
    spec = parse_program({"kind": "music", "tempo_bpm": 90})
    a = make_program(spec.to_json(), FS, 77).read(30000)
    b = make_program(spec, FS, 77).read(30000)
    assert np.array_equal(a, b)


@pytest.mark.parametrize("table, match", [
    ({"kind": "beep"}, "kind = 'beep' is not one of"),
    ({"kind": "tone", "frequency": "1k", "freq": 3}, "unknown key 'freq'"),
    ({"kind": "tone"}, "missing key 'frequency'"),
    ({"kind": "tone", "frequency": "30k"}, "at most 20 kHz"),
    ({"kind": "tones", "frequencies": []}, "non-empty list"),
    ({"kind": "tones", "frequencies": [400, 1000], "levels_db": [0]}, "list of 2 levels"),
    ({"kind": "noise", "low": "4k", "high": "3k"}, "must be below high"),
    ({"kind": "speech", "pitch": 900}, "50..400 Hz"),
    ({"kind": "wav", "path": "nowhere.wav"}, "not found"),
    ({"kind": "sweep", "start": 100, "stop": 200, "law": "cubic"}, "not one of linear, log"),
])
def test_bad_program_tables(table, match):
    with pytest.raises(ParameterError, match=match):
        parse_program(table, "s.toml: station 'A': program")


def test_rate_too_low_for_program():
    with pytest.raises(ParameterError, match="too low"):
        make_program({"kind": "tone", "frequency": "4k"}, 8000.0, 0)
