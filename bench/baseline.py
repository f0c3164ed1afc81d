"""The plain whole-file pipeline the benchmark compares against.

This is how one would first write a superheterodyne receiver in a notebook:
read the whole capture into memory, mix to a real IF at the full capture rate,
band-pass it with a full-rate IIR, rectify, low-pass and resample. It is kept
here only as the benchmark's reference point; sdrx never uses it.

Usage: python bench/baseline.py CAPTURE.sigmf-meta TUNE_HZ OUT.wav
"""

import json
import sys
from pathlib import Path

import numpy as np
import soundfile as sf
from scipy import signal


def main(meta_path, tune_hz, out_path):
    meta = json.loads(Path(meta_path).read_text())
    fs = float(meta["global"]["core:sample_rate"])
    fc = float(meta["captures"][0]["core:frequency"])
    raw = np.fromfile(Path(meta_path).with_suffix(".sigmf-data"), dtype="<i2").astype(np.float64) / 32768.0
    x = raw[0::2] + 1j * raw[1::2]
    if_hz = 455e3
    t = np.arange(len(x)) / fs
    # real mixing at the full rate: move the station to the IF and keep the real part
    y = np.real(x * np.exp(2j * np.pi * (if_hz - (tune_hz - fc)) * t))
    sos = signal.butter(4, [if_hz - 4.5e3, if_hz + 4.5e3], btype="bandpass", fs=fs, output="sos")
    y = signal.sosfilt(sos, y)
    y = np.abs(y)                                       # rectify
    sos_lp = signal.butter(4, 4.5e3, fs=fs, output="sos")
    y = signal.sosfilt(sos_lp, y)
    y = signal.resample_poly(y, 48000, int(fs))
    y = y - np.mean(y)
    y = 0.5 * y / max(1e-12, np.max(np.abs(y)))
    sf.write(out_path, y, 48000, subtype="PCM_16")


if __name__ == "__main__":
    main(sys.argv[1], float(sys.argv[2]), sys.argv[3])
