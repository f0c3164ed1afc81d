"""Writing a comparison: outputs already received are aligned, loudness-matched and written as one folder.

Steps of :func:`write_comparison`: every output at one rate → aligned in time
(cross-correlation against the first, :mod:`sdrx.compare.align`) → brought to
one integrated loudness (ITU-R BS.1770, pyloudnorm) without clipping and
rounded to 16 bits → one column of figures per chain → ``compare.json``, the
page and the WAVs, committed together with the folder's marker.
"""

from __future__ import annotations

import json
from fractions import Fraction
from pathlib import Path

import numpy as np

from ..analysis.audio_response import AUDIO_BANDWIDTH_DEFINITION, audio_bandwidth_hz
from ..fileio import write_folder
from ..units import format_frequency
from . import blind as blind_mod
from .align import align
from .figures import designed_figures, selectivity_curve, sinad_db
from .loudness import integrated_loudness, match_loudness

__all__ = ["MARKER", "KEY_FILE", "PAGE_FILE", "JSON_FILE", "file_names", "write_comparison"]

#: marker file that says a folder holds a comparison written by sdrx
MARKER = ".sdrx-compare"
KEY_FILE = "blind-key.json"
PAGE_FILE = "index.html"
JSON_FILE = "compare.json"
#: peak limit of the loudness-matched outputs
PEAK_LIMIT_DBFS = -1.0
#: largest delay difference between outputs that alignment searches
MAX_LAG_S = 0.05
#: with designed delays known: search this far either side of their difference
ALIGN_WINDOW_S = 0.25e-3


def file_names(labels, plan) -> tuple:
    """The WAV names (one per label) and every file the comparison writes."""
    wav_names = [f"{lab}.wav" for lab in labels]
    return wav_names, wav_names + [JSON_FILE, PAGE_FILE] + ([KEY_FILE] if plan.n else [])


def write_comparison(out_dir, choices, designs, raw, rates, *, plan, tune_hz: float, spacing_hz: float,
                     header: dict, summaries=None, tone_hz=None, old_files=frozenset(),
                     designed_delays_s=None, progress_done=None) -> dict:
    """Align, loudness-match and write a comparison of outputs that are already computed.

    The second half of :func:`sdrx.compare.run.compare`, separate so that it can be driven with
    audio made otherwise (tests, or outputs of a receiver run elsewhere).

    Parameters
    ----------
    out_dir : Path
        Output folder, already checked with :func:`check_out_dir`.
    choices : list of SpecChoice
        From :func:`parse_spec_args`.
    designs : list of ChainDesign
        One per choice (for the designed figures and the plot).
    raw : list of ndarray
        Each chain's mono audio of the same excerpt.
    rates : list of float
        Their sample rates (resampled to the highest when they differ).
    plan : BlindPlan
        The trials (``plan.n`` may be 0).
    tune_hz, spacing_hz : float
        Tune and channel spacing.
    header : dict
        ``capture`` (dict), ``excerpt`` (dict), ``path`` (str), ``subtitle`` (str),
        ``capture_name`` (str), copied into ``compare.json`` and the page.
    summaries : list of dict, optional
        Receiver run summaries (a few of their figures are kept).
    tone_hz : float, optional
        The station's single test tone (truth sidecar), for SINAD.
    old_files : set of str
        Files an earlier comparison in the folder listed (from :func:`check_out_dir`).
    designed_delays_s : list of float, optional
        Each chain's designed group delay (``Receiver.delay_s``), kept beside the
        measured lag as a cross-check.
    progress_done : callable, optional
        Called once when everything is written.

    Returns
    -------
    dict
        The contents of ``compare.json``.
    """
    out = Path(out_dir)
    tune = float(tune_hz)
    spacing = float(spacing_hz)
    labels = [c.label for c in choices]
    wav_names, new_files = file_names(labels, plan)
    if summaries is None:
        summaries = [{} for _ in choices]
    audio_fs, raw = _common_rate(raw, rates)
    alignment = align(raw, audio_fs, max_lag_s=MAX_LAG_S, expected_s=designed_delays_s, window_s=ALIGN_WINDOW_S)
    cut = [alignment.cut(i, x) for i, x in enumerate(raw)]
    match, quantized, after = _match_loudness(cut, audio_fs, choices)
    spec_rows, curves = [], []
    for i, (c, d) in enumerate(zip(choices, designs)):
        spec_rows.append(_spec_row(
            c, d, wav=wav_names[i], index=i, tune=tune, spacing=spacing, path=header["path"],
            match=match, after=after[i], delay_ms=alignment.lags[i] / audio_fs * 1e3,
            designed_delays_s=designed_delays_s, summary=summaries[i],
            sinad=_finite_or_none(sinad_db(cut[i], audio_fs, tone_hz)) if tone_hz else None))
        off, db = selectivity_curve(d, tune)
        curves.append((c.label, off, db))
    key_salt = np.random.default_rng([plan.seed, 0x5D]).bytes(16)
    public_trials = plan.public_trials(labels)
    result = _result(header, tune, spacing, audio_fs, alignment, match, labels, spec_rows, public_trials, plan,
                     aligned_to_design=designed_delays_s is not None)
    page = _page(header, tune, spacing, alignment.length / audio_fs, match, spec_rows, curves,
                 _blind_model(plan, public_trials, key_salt))
    files = _folder_files(new_files, wav_names, quantized, audio_fs, plan, labels, result, page)
    stale = [out / name for name in sorted(old_files - set(new_files) - {MARKER})
             if Path(name).name == name and name not in (".", "..") and (out / name).is_file()]
    write_folder(out, files, head=MARKER, retire=stale)
    if progress_done is not None:
        progress_done()
    return result


def _common_rate(raw, rates):
    """Every output at the highest of their rates, cut to the shortest."""
    audio_fs = max(rates)
    raw = [_resample(x, r, audio_fs) for x, r in zip(raw, rates)]
    n = min(x.size for x in raw)
    return audio_fs, [x[:n] for x in raw]


def _match_loudness(cut, audio_fs, choices):
    """The loudness match, the matched outputs as 16-bit codes and their loudness after."""
    # 0.001 dB of margin keeps the peak at or below the limit after rounding to 16 bits (half an LSB)
    match = match_loudness(cut, audio_fs, peak_limit_dbfs=PEAK_LIMIT_DBFS - 0.001,
                           names=[f"spec {c.label}" for c in choices])
    quantized = []
    for x, g in zip(cut, match.gain_db):
        y = x * (10.0 ** (g / 20.0))
        quantized.append(np.clip(np.round(y * 32768.0), -32768, 32767).astype(np.int16))
    after = [integrated_loudness(q / 32768.0, audio_fs, name=c.label) for q, c in zip(quantized, choices)]
    return match, quantized, after


def _spec_row(c, d, *, wav, index, tune, spacing, path, match, after, delay_ms, designed_delays_s, summary,
              sinad) -> dict:
    """One chain's column of the figures: designed, measured from its output, and its receiver's checks."""
    i = index
    return {
        "label": c.label,
        "chain": c.spec,
        "name": d.name,
        "wav": wav,
        "loudness_lufs_before": match.before_lufs[i],
        "loudness_lufs_after": after,
        "gain_db": match.gain_db[i],
        "peak_dbfs_after": match.peak_dbfs[i] + match.gain_db[i],
        "delay_ms": delay_ms,
        "designed_delay_ms": (None if designed_delays_s is None
                              else (designed_delays_s[i] - designed_delays_s[0]) * 1e3),
        **designed_figures(d, tune, spacing),
        # the chain's, from test tones through it (the programme's content would not follow the chain)
        "audio_bandwidth_hz": audio_bandwidth_hz(d, tune, path=path, spacing_hz=spacing),
        "sinad_db": sinad,
        # compare takes the receiver's float output and re-levels it, so its clipping count
        # (of the 16-bit scale, mostly in the start-up left out) does not apply
        "receive": {k: summary.get(k) for k in ("lo_hz", "if_hz", "image_hz", "carrier_dbfs", "full_scale_dbm",
                                                    "carrier_dbm", "agc_gain_db", "checks")
                    if k in summary} | {"warnings": [w for w in summary.get("warnings", [])
                                                     if "clipped at full scale" not in w]},
    }


def _result(header, tune, spacing, audio_fs, alignment, match, labels, spec_rows, public_trials, plan, *,
            aligned_to_design: bool) -> dict:
    """The contents of ``compare.json``."""
    return _plain({
        "capture": header["capture"],
        "tune_hz": tune,
        "excerpt": dict(header["excerpt"], audio_seconds=alignment.length / audio_fs),
        "path": header["path"],
        **({"corrections": header["corrections"]} if "corrections" in header else {}),
        "audio_rate_hz": audio_fs,
        "spacing_hz": spacing,
        "audio_bandwidth_definition": AUDIO_BANDWIDTH_DEFINITION,
        "alignment": {
            "reference": labels[0],
            "method": ("integer lag at the peak of the cross-correlation with the first output, searched "
                       + (f"within {ALIGN_WINDOW_S * 1e3:g} ms of the designed group-delay difference"
                          if aligned_to_design else f"within {MAX_LAG_S * 1e3:g} ms")),
        },
        "loudness": {
            "standard": "ITU-R BS.1770 integrated loudness (pyloudnorm)",
            "target_lufs": match.target_lufs,
            "peak_limit_dbfs": PEAK_LIMIT_DBFS,
            "limited_by": labels[match.limiting],
            "rule": "target = min over specs of (loudness + peak limit - sample peak)",
        },
        "specs": spec_rows,
        "trials": public_trials,
        "key_file": KEY_FILE if plan.n else None,
        "page": PAGE_FILE,
    })


def _blind_model(plan, public_trials, key_salt):
    """What the page's script needs for the blind trials (the key obfuscated), or None."""
    if not plan.n:
        return None
    import base64

    return {
        "trials": [dict(t, a_index=a, b_index=b) for t, (a, b) in zip(public_trials, plan.pairs)],
        "key": blind_mod.encode_key(plan.x_is, key_salt),
        "salt": base64.b64encode(key_salt).decode("ascii"),
        "chance": blind_mod.chance_table(plan.n),
    }


def _page(header, tune, spacing, duration_s, match, spec_rows, curves, blind_model) -> str:
    """The listening page's HTML."""
    from .page import render_page
    from .plot import selectivity_png

    return render_page({
        "title": f"sdrx compare: {header['capture_name']} at {format_frequency(tune)}",
        "subtitle": [header["subtitle"]],
        "duration_s": duration_s,
        "target_lufs": match.target_lufs,
        "spacing_hz": spacing,
        "specs": spec_rows,
        "plot_png": selectivity_png(curves, tune_hz=tune, spacing_hz=spacing),
        "blind": blind_model,
    })


def _folder_files(new_files, wav_names, quantized, audio_fs, plan, labels, result, page) -> dict:
    """Every file of the comparison folder, name to bytes, the marker first."""
    files = {MARKER: _json_text({"made_by": "sdrx compare", "files": sorted(new_files)}).encode("utf-8")}
    for name, q in zip(wav_names, quantized):
        files[name] = _wav_bytes(q, audio_fs)
    if plan.n:
        key = plan.key(labels)
        key["note"] = "X of each trial; the page shows this only when the key is revealed"
        files[KEY_FILE] = _json_text(key).encode("utf-8")
    files[JSON_FILE] = _json_text(result).encode("utf-8")
    files[PAGE_FILE] = page.encode("utf-8")
    return files
def _resample(x: np.ndarray, fs_in: float, fs_out: float) -> np.ndarray:
    if fs_in == fs_out:
        return x
    from scipy.signal import resample_poly

    ratio = Fraction(fs_out / fs_in).limit_denominator(1000)
    return resample_poly(x, ratio.numerator, ratio.denominator)


def _wav_bytes(q: np.ndarray, fs: float) -> bytes:
    """16-bit PCM WAV file of the codes ``q`` (soundfile: a plain header, no time stamps)."""
    import io

    import soundfile as sf

    buf = io.BytesIO()
    sf.write(buf, q, int(round(fs)), subtype="PCM_16", format="WAV")
    return buf.getvalue()


def _plain(obj):
    """JSON-ready copy: numpy scalars to Python, non-finite floats to None, tuples to lists."""
    if isinstance(obj, dict):
        return {str(k): _plain(v) for k, v in obj.items()}
    if isinstance(obj, (list, tuple)):
        return [_plain(v) for v in obj]
    if isinstance(obj, (bool, np.bool_)):
        return bool(obj)
    if isinstance(obj, (int, np.integer)):
        return int(obj)
    if isinstance(obj, (float, np.floating)):
        return float(obj) if np.isfinite(obj) else None
    if isinstance(obj, Path):
        return str(obj)
    return obj


def _json_text(obj) -> str:
    return json.dumps(_plain(obj), indent=2, allow_nan=False) + "\n"


def _finite_or_none(v):
    return None if v is None or not np.isfinite(v) else float(v)
