"""``sdrx compare``: the same excerpt through several chains, fairly, on one page.

Flow: parse and design every spec → validate the excerpt and the output folder
→ run :func:`sdrx.run.receive` for each spec into a temporary folder →
:func:`sdrx.compare.write.write_comparison`: align the outputs in time
(cross-correlation against the first), match their integrated loudness
(ITU-R BS.1770, pyloudnorm) without clipping, figures, and write
``<label>.wav`` per spec, ``compare.json``, ``blind-key.json`` (with
``--blind``) and ``index.html`` into the output folder.
"""

from __future__ import annotations

import json
import re
import tempfile
from dataclasses import dataclass
from pathlib import Path
from typing import Sequence

import numpy as np

from ..errors import OutputError, ParameterError
from ..fileio import same_file
from ..units import format_frequency, parse_frequency, parse_seconds
from . import blind as blind_mod
from .write import MARKER, file_names, write_comparison

__all__ = [
    "MARKER",
    "MAX_SECONDS",
    "DEFAULT_SECONDS",
    "MIN_SECONDS",
    "SpecChoice",
    "safe_label",
    "parse_spec_args",
    "check_out_dir",
    "compare",
    "write_comparison",
]

#: longest excerpt accepted (every output is held in memory for alignment and loudness)
MAX_SECONDS = 120.0
#: excerpt length when --duration is not given (or the rest of the capture, if shorter)
DEFAULT_SECONDS = 30.0
#: shortest excerpt (loudness needs several 400 ms blocks)
MIN_SECONDS = 1.0
#: receiver start-up (AGC pull-in from its starting gain, filter transients) left out of every output
SETTLE_S = 0.2

_UNSAFE = re.compile(r"[^A-Za-z0-9._-]+")


def safe_label(text: str, fallback: str = "spec") -> str:
    """A label usable as a file name on any system: letters, digits, ``.``, ``_``, ``-``.

    Runs of other characters become one ``-``; leading/trailing ``-`` and ``.``
    are dropped; at most 48 characters.

    Examples
    --------
    >>> safe_label("my wide/IF filter")
    'my-wide-IF-filter'
    >>> safe_label("<script>alert(1)</script>")
    'script-alert-1-script'
    >>> safe_label("..", "spec-2")
    'spec-2'
    """
    s = _UNSAFE.sub("-", str(text)).strip("-.")[:48].strip("-.")
    return s or fallback


@dataclass(frozen=True)
class SpecChoice:
    """One spec argument of ``sdrx compare``.

    Attributes
    ----------
    arg : str
        The argument as given.
    spec : str
        The preset name or spec file path.
    label : str
        File-safe label (``<label>.wav``).
    identity : tuple
        ``("preset", name)`` or ``("file", resolved path)``: what makes two specs the same.
    """

    arg: str
    spec: str
    label: str
    identity: tuple


def parse_spec_args(args: Sequence[str]) -> list:
    """Split ``SPEC`` or ``SPEC@LABEL`` arguments and check they can be told apart.

    Parameters
    ----------
    args : sequence of str
        Preset names or TOML paths, each optionally followed by ``@LABEL``. An
        argument that names an existing file is taken whole, even if it holds ``@``.

    Returns
    -------
    list of SpecChoice

    Raises
    ------
    ParameterError
        Fewer than two specs; the same spec twice without distinct labels (the
        message suggests a label); two labels equal apart from case.

    Examples
    --------
    >>> [c.label for c in parse_spec_args(["wide", "medium@medium-a", "medium@medium-b"])]
    ['wide', 'medium-a', 'medium-b']
    """
    args = [str(a) for a in args]
    if len(args) < 2:
        got = f"got 1: {args[0]}" if args else "got none"
        raise ParameterError(
            f"SPEC: compare needs at least two specs ({got}); e.g. sdrx compare CAPTURE --tune F wide medium -o DIR"
        )
    out = []
    for i, arg in enumerate(args):
        spec, label_text = arg, None
        if not Path(arg).is_file() and "@" in arg:
            spec, label_text = arg.rsplit("@", 1)
            if not spec or not label_text:
                raise ParameterError(f"SPEC {arg}: write SPEC@LABEL with both parts, e.g. medium@medium-2")
        p = Path(spec)
        if p.is_file() or p.suffix.lower() == ".toml":
            identity = ("file", str(p.resolve()))
            default = p.stem
        else:
            identity = ("preset", spec)
            default = spec
        label = safe_label(label_text if label_text is not None else default, f"spec-{i + 1}")
        out.append(SpecChoice(arg, spec, label, identity))
    for j, c in enumerate(out):
        for i in range(j):
            o = out[i]
            if c.identity == o.identity and c.label.lower() == o.label.lower():
                raise ParameterError(
                    f"SPEC {c.arg}: the same spec is given twice (specs {i + 1} and {j + 1}); to compare a spec "
                    f"with itself give the copy a label, e.g. {c.spec}@{c.label}-2"
                )
            if c.label.lower() == o.label.lower():
                raise ParameterError(
                    f"SPEC {c.arg}: label {c.label} is also the label of spec {i + 1} ({o.arg}); "
                    f"give one a label of its own, e.g. {c.spec}@{c.label}-2"
                )
    return out


def _marker_files(d: Path):
    m = d / MARKER
    if not m.is_file():
        return None
    try:
        raw = json.loads(m.read_text(encoding="utf-8"))
        files = raw["files"]
    except (ValueError, KeyError, TypeError, OSError):
        return None
    if not isinstance(files, list) or not all(isinstance(f, str) for f in files):
        return None
    return set(files)


def check_out_dir(out_dir, *, force: bool = False) -> set:
    """Check the output folder before any work; return the files an earlier comparison left.

    Parameters
    ----------
    out_dir : str or Path
        The folder given with ``-o``.
    force : bool
        Write even though the folder is not empty.

    Returns
    -------
    set of str
        Names listed in the folder's marker file (empty for a new or empty folder).

    Raises
    ------
    OutputError
        A file rather than a folder; a parent folder that does not exist; a
        non-empty folder without ``force`` (the message says whether it holds
        files not made by sdrx).

    Notes
    -----
    sdrx marks every comparison folder with :data:`MARKER` (JSON listing the
    files it wrote). With ``force`` sdrx writes its files and removes the ones
    an earlier comparison listed that this one does not write; it never
    removes files it did not make.
    """
    d = Path(out_dir)
    if d.exists() and not d.is_dir():
        raise OutputError(f"-o {d}: is a file; give a folder for the comparison")
    if not d.exists():
        parent = d.parent if str(d.parent) else Path(".")
        if not parent.is_dir():
            raise OutputError(f"-o {d}: folder {parent} does not exist")
        return set()
    from ..fileset import clean_folder, is_own_temporary, recover

    recover(d / MARKER)   # finish a comparison that was killed while its files were renamed
    clean_folder(d)       # and remove what runs killed before their commit left
    entries = sorted(p.name for p in d.iterdir() if not is_own_temporary(p.name))
    if not entries:
        return set()
    ours = _marker_files(d)
    known = (ours or set()) | ({MARKER} if ours is not None else set())
    foreign = [e for e in entries if e not in known]
    if foreign and not force:
        shown = ", ".join(foreign[:3]) + (", ..." if len(foreign) > 3 else "")
        raise OutputError(
            f"-o {d}: holds files not made by sdrx ({shown}); choose a new or empty folder, "
            "or pass --force to write beside them"
        )
    if not force:
        raise OutputError(f"-o {d}: holds an earlier comparison; pass --force to replace it")
    return ours or set()


def _truth_tone(capture_path: Path, tune_hz: float):
    """Single tone frequency of the station at ``tune_hz`` from the truth sidecar, or None."""
    from .truth import single_tone_hz

    return single_tone_hz(capture_path, tune_hz)


def compare(capture, tune_hz, specs: Sequence[str], out_dir, *, start_s=0.0, duration_s=None,
            blind: int = 0, seed=None, spacing_hz=10e3, path: str = "fast", force: bool = False,
            progress=None, datatype=None, fs=None, center_hz=None, correct=None, ppm=None,
            full_scale_dbm=None) -> dict:
    """Run several chains over one excerpt and write a fair listening comparison.

    Parameters
    ----------
    capture : str or Path
        The capture (any format :func:`sdrx.capture.open_capture` reads).
    tune_hz : float or str
        The station's carrier frequency.
    specs : sequence of str
        At least two preset names or TOML paths, each optionally ``SPEC@LABEL``.
    out_dir : str or Path
        Output folder (created if missing; see :func:`check_out_dir`).
    start_s, duration_s : float or str
        The excerpt; ``duration_s`` None means the rest of the capture, at most
        :data:`DEFAULT_SECONDS`. At most :data:`MAX_SECONDS`, at least :data:`MIN_SECONDS`.
    blind : int
        Number of A/B/X trials (0: none).
    seed : int or None
        Seed for drawing X; None draws a fresh one (written only to the key file).
    spacing_hz : float or str
        Channel spacing for the adjacent-channel figures.
    path : {"fast", "exact"}
        Execution path of the receiver.
    force : bool
        Write into a folder that is not empty.
    progress : callable, optional
        ``progress(done, total)`` in capture samples over all specs.
    datatype, fs, center_hz
        Passed to :func:`sdrx.capture.open_capture` (raw files, I/Q WAV).
    correct, ppm
        Capture corrections (``--correct``, ``--ppm``), estimated once over the
        excerpt run (with its settling) and applied alike for every spec.
    full_scale_dbm : float or str, optional
        ``--full-scale-dbm``: antenna power of a full-scale carrier in this
        capture, for every spec (overrides each spec's ``frontend.full_scale_dbm``).

    Returns
    -------
    dict
        The contents of ``compare.json``.

    Raises
    ------
    ParameterError, CaptureError, OutputError
        Bad specs, labels, excerpt or folder; nothing is written then.

    Notes
    -----
    Alignment: integer lag at the peak of the cross-correlation of each output
    with the first (:func:`sdrx.compare.align.align`), searched within
    :data:`sdrx.compare.write.ALIGN_WINDOW_S` of the difference of the chains' designed group
    delays (``Receiver.delay_s``), outputs cut to their common span. Loudness: target ``T = min_i(L_i − 1 dBFS − P_i)`` (L integrated
    loudness by ITU-R BS.1770 via pyloudnorm, P sample peak), gain ``T − L_i``:
    all outputs at one loudness, none above −1 dBFS sample peak.
    """
    tune, spacing = _tuning(tune_hz, spacing_hz)
    from ..chain.spec import full_scale_override

    fs_dbm = full_scale_override(full_scale_dbm)
    choices = parse_spec_args(specs)
    designs = _designs(choices, tune, spacing)
    _check_blind_count(blind)
    from ..capture import open_capture

    reader = open_capture(capture, datatype=datatype, fs=fs, center_hz=center_hz)
    info = reader.info
    start, duration = _excerpt(reader, start_s, duration_s)
    plan = _blind_plan(blind, seed, len(choices))
    out = Path(out_dir)
    old_files = check_out_dir(out, force=force)
    _check_targets(out, choices, plan, info)

    # the receiver starts with the AGC at its starting gain: run it from up to SETTLE_S before the
    # excerpt and drop SETTLE_S of audio (with --start 0 the first SETTLE_S of the excerpt is not heard)
    preroll = min(start, SETTLE_S)
    rx_start, rx_duration = start - preroll, duration + preroll
    from ..capture.correct import plan_corrections

    fixes = plan_corrections(reader, correct, ppm=ppm, spacing_hz=spacing, start_s=rx_start,
                             duration_s=rx_duration)
    total = int(round(rx_duration * info.fs)) * len(choices)
    raw, rates, summaries, delays = _receive_all(
        capture, tune, designs, info, rx_start=rx_start, rx_duration=rx_duration, path=path, fixes=fixes,
        spacing=spacing, progress=progress, datatype=datatype, fs=fs, center_hz=center_hz, full_scale_dbm=fs_dbm)
    return write_comparison(
        out, choices, designs, raw, rates, plan=plan, tune_hz=tune, spacing_hz=spacing,
        summaries=summaries, tone_hz=_truth_tone(Path(info.path), tune), old_files=old_files,
        designed_delays_s=delays,
        header=_header(info, start, duration, preroll, path, fixes, spacing),
        progress_done=(lambda: progress(total, total)) if progress is not None else None,
    )


def _tuning(tune_hz, spacing_hz):
    """The tune and the channel spacing in Hz, from the options."""
    tune = parse_frequency(tune_hz, "--tune")
    spacing = parse_frequency(spacing_hz, "--spacing")
    if spacing <= 0:
        raise ParameterError(f"--spacing: {spacing_hz!r} must be above 0 (e.g. 9k or 10k)")
    return tune, spacing


def _designs(choices, tune: float, spacing: float) -> list:
    """Design every spec (an error names the spec) and check each can tune ``tune``."""
    from ..chain import design_chain

    designs = []
    for i, c in enumerate(choices):
        try:
            designs.append(design_chain(c.spec))
        except ParameterError as exc:
            msg = str(exc)
            if msg.startswith("--chain "):
                msg = msg[len("--chain "):]
            raise ParameterError(f"SPEC {i + 1} ({c.arg}): {msg}") from None
    from ..analysis.selectivity import validate_tuning

    for d in designs:
        validate_tuning(d, tune, spacing)
    return designs


def _check_blind_count(blind) -> None:
    if isinstance(blind, bool) or not isinstance(blind, (int, np.integer)):
        raise ParameterError(f"--blind: {blind!r}; give a whole number of trials")


def _excerpt(reader, start_s, duration_s):
    """Start and duration (s) of the excerpt, within the capture and compare's limits."""
    info = reader.info
    start = parse_seconds(start_s, "--start")
    _, avail = reader.sample_range(start, None)  # CaptureError when the start is past the end
    rest_s = avail / info.fs
    if duration_s is None:
        duration = min(rest_s, DEFAULT_SECONDS)
    else:
        duration = parse_seconds(duration_s, "--duration", allow_zero=False)
        if duration > MAX_SECONDS:
            raise ParameterError(
                f"--duration: {duration:g} s is longer than compare allows ({MAX_SECONDS:g} s); choose a shorter excerpt"
            )
        if start + duration > info.seconds + 0.5 / info.fs:
            raise ParameterError(
                f"--duration: the excerpt {start:g} s + {duration:g} s runs past the end of {info.path} "
                f"({info.seconds:.6g} s)"
            )
    if duration < MIN_SECONDS:
        raise ParameterError(
            f"--duration: the excerpt is {duration:.3g} s; compare needs at least {MIN_SECONDS:g} s "
            f"({info.path} is {info.seconds:.6g} s long, --start {start:g})"
        )
    return start, duration


def _blind_plan(blind: int, seed, n_specs: int):
    """The blind trials (none when ``blind`` is 0); ``--seed`` only with trials to draw."""
    if seed is not None:
        if isinstance(seed, bool) or not isinstance(seed, (int, np.integer)):
            raise ParameterError(f"--seed: {seed!r}; give a whole number >= 0")
        if not blind:
            raise ParameterError(f"--seed {seed}: only draws the blind trials; add --blind N or leave --seed out")
    return blind_mod.plan_trials(blind, n_specs, blind_mod.fresh_seed() if seed is None else int(seed))


def _check_targets(out: Path, choices, plan, info) -> None:
    """No file to be written is a folder or one of the inputs."""
    _, new_files = file_names([c.label for c in choices], plan)
    inputs = [info.path, info.data_path] + [Path(c.spec) for c in choices if c.identity[0] == "file"]
    for name in new_files:
        target = out / name
        if target.is_dir():
            raise OutputError(f"-o {out}: {name} is a folder; sdrx would write a file of that name")
        if any(same_file(target, src) for src in inputs):
            raise OutputError(f"-o {out}: {name} would overwrite an input; choose another folder")


def _receive_all(capture, tune, designs, info, *, rx_start, rx_duration, path, fixes, spacing, progress,
                 datatype, fs, center_hz, full_scale_dbm=None):
    """Receive the excerpt through every design into a temporary folder.

    Returns each chain's audio after :data:`SETTLE_S`, its rate, its run summary and
    its designed group delay.
    """
    import soundfile as sf

    from ..run import Receiver, receive

    n_capture = int(round(rx_duration * info.fs))
    total = n_capture * len(designs)
    raw, rates, summaries, delays = [], [], [], []
    with tempfile.TemporaryDirectory(prefix="sdrx-compare-") as tmpdir:
        for i, d in enumerate(designs):
            def sub(done, _total, _i=i):
                if progress is not None:
                    progress(min(total, _i * n_capture + int(done)), total)

            wav = Path(tmpdir) / f"{i}.wav"
            summary = receive(capture, tune, d, wav, path=path, start_s=rx_start, duration_s=rx_duration,
                              float_output=True, force=True, progress=sub if progress else None,
                              datatype=datatype, fs=fs, center_hz=center_hz, correct=fixes,
                              spacing_hz=spacing, full_scale_dbm=full_scale_dbm)
            audio, afs = sf.read(str(wav), dtype="float64", always_2d=False)
            if audio.ndim != 1:
                audio = audio[:, 0]
            raw.append(audio[int(round(SETTLE_S * afs)):])
            rates.append(float(afs))
            summaries.append(summary)
            delays.append(Receiver(d, info, tune, path=path, full_scale_dbm=full_scale_dbm).delay_s)
    return raw, rates, summaries, delays


def _header(info, start, duration, preroll, path, fixes, spacing) -> dict:
    """What ``compare.json`` and the page say about the capture, the excerpt and the run."""
    return {
        "capture": info.to_json(),
        "excerpt": {"start_s": start, "duration_s": duration, "settle_s": SETTLE_S,
                    "heard_from_s": round(start + SETTLE_S - preroll, 9)},
        "path": path,
        "corrections": fixes.to_json(),
        "subtitle": (f"Capture {info.path} ({info.kind}, {format_frequency(info.fs)} rate)"
                     + (f", corrected ({', '.join(sorted(fixes.to_json()['applied']))})" if fixes.active else "")
                     + "; excerpt "
                     f"{start:g} s + {duration:g} s, heard from {start + SETTLE_S - preroll:g} s after "
                     f"{SETTLE_S:g} s of receiver settling; {path} path; channel spacing "
                     f"{format_frequency(spacing)}."),
        "capture_name": Path(info.path).name,
    }
