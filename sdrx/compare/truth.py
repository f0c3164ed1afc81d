"""What the capture's truth sidecar says about the station at the tune."""

from __future__ import annotations

import json
from pathlib import Path

from ..errors import CaptureError

__all__ = ["truth_path", "station_at", "single_tone_hz"]

#: how far a station's carrier may be from the tune and still be "the station at the tune"
TUNE_TOLERANCE_HZ = 1000.0
_FREQ_KEYS = ("carrier_hz", "frequency_hz")  # as sent (with its error), as announced


def truth_path(capture_path) -> Path:
    """``<stem>.truth.json`` beside the capture (the synthesizer's rule, :func:`sdrx.synth.truth_path_for`).

    Examples
    --------
    >>> truth_path("demo/coast.sigmf-meta").name
    'coast.truth.json'
    """
    from ..synth import truth_path_for

    return truth_path_for(capture_path)


def _station_freq(st):
    for k in _FREQ_KEYS:
        if isinstance(st.get(k), (int, float)):
            return float(st[k])
    return None


def station_at(capture_path, tune_hz: float):
    """The truth sidecar's station nearest ``tune_hz`` (within 1 kHz), or None.

    Returns None when there is no sidecar.

    Raises
    ------
    CaptureError
        If the sidecar exists but is not JSON with a ``stations`` list.
    """
    p = truth_path(capture_path)
    if not p.is_file():
        return None
    try:
        truth = json.loads(p.read_text(encoding="utf-8"))
    except (ValueError, OSError) as exc:
        raise CaptureError(f"{p}: truth sidecar is not readable JSON ({exc})") from None
    stations = truth.get("stations") if isinstance(truth, dict) else None
    if not isinstance(stations, list):
        raise CaptureError(f"{p}: truth sidecar has no 'stations' list")
    best, best_d = None, TUNE_TOLERANCE_HZ
    for st in stations:
        if not isinstance(st, dict):
            continue
        f = _station_freq(st)
        if f is not None and abs(f - tune_hz) <= best_d:
            best, best_d = st, abs(f - tune_hz)
    return best


def single_tone_hz(capture_path, tune_hz: float):
    """Frequency of the station's single test tone, or None (no sidecar, no station, not one tone)."""
    st = station_at(capture_path, tune_hz)
    if st is None:
        return None
    prog = st.get("program")
    if not isinstance(prog, dict):
        return None
    if prog.get("kind") == "tone" and isinstance(prog.get("frequency"), (int, float)):
        return float(prog["frequency"])
    if prog.get("kind") == "tones":
        fr = prog.get("frequencies")
        if isinstance(fr, list) and len(fr) == 1 and isinstance(fr[0], (int, float)):
            return float(fr[0])
    return None
