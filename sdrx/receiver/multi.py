"""Many stations of one capture in one pass: a shared channelizer, each station's own IF, AGC and audio.

A :class:`MultiReceiver` binds a list of (design, tuning) pairs to one
capture. Every station is an ordinary :class:`~sdrx.receiver.Receiver`
(fast path): its checks, warnings, LO plan, IF stages, back end (AGC,
detector, audio) and statistics are the receiver's own. What is shared is
the expensive front: the capture is read once, and one
:class:`~sdrx.dsp.channelbank.ChannelBank` per channel rate cuts every
station's wanted and image channels from the same FFT of each input
segment, with array operations over all channels at once (a channel two
stations both need is cut once). Each station's channels are then combined
exactly as its own front end would (``FastFrontEnd._mix``), and the IF
stages of all stations that share a chain run as one 2-D filter over a
stations × samples array (:func:`if_stages_together`), as do the monitors'
spectra (:func:`~sdrx.receiver.monitor.feed_spectra`): the same operations
per station, so the same samples as one station at a time.

The clean start (:mod:`sdrx.receiver.preroll`) is shared too: the bank runs
one pre-roll, the carriers found near *every* station's channels continued
backwards for the longest of the stations' pre-rolls, and each station takes
the bank's output from the start of its own pre-roll. A station's pre-roll
therefore also holds the carriers beyond its own channels' windows
(> 48 kHz away), which its channels pass at −60 dB or less and its IF
stages at −100 dB or less, and starts from a bank already running rather
than from rest. After the pre-roll the station's audio equals ``sdrx
receive`` of that station with the same chain to float rounding (tested:
more than 100 dB below the signal; a single station alone is identical).

Where the work goes, per station (measured in ``make bench``): the
channelizer's share (up to four channels: wanted, image, and the monitor's
flat channels at the tune and the image), the monitor's spectra, the IF
stages, and the back end (AGC, detector, audio filters, resampler). The back
ends of the stations that share a chain run as one
(:func:`~sdrx.receiver.backend_batch.process_together`): the AGC's control
loop steps all of them with one array operation per interval, the filters
run as 2-D ``sosfilt`` calls; each station's audio is the same samples as
its back end stepping alone (tested).
"""

from __future__ import annotations

import math
from typing import Sequence

import numpy as np

from ..dsp.channelbank import ChannelBank
from .backend_batch import process_together
from .monitor import feed_spectra
from .receiver import Receiver

__all__ = ["MultiReceiver", "StationReceiver"]


class _BankedFront:
    """A station's fast front end whose channels come from a shared bank.

    Holds the station's own :class:`FastFrontEnd` (its tables, combination
    of wanted and image, IF stages and their state); ``flush`` returns the
    tail the bank computed for this station.
    """

    def __init__(self, front, monitor):
        self.front = front
        self.monitor = monitor          # the front end's on_extra is this monitor's feed
        self.tail = np.zeros(0, complex)

    def combine(self, outs) -> np.ndarray:
        """The station's channels (its own, then its monitor's) -> IF output, as its front end would."""
        return self.front._split(outs)

    def mix(self, outs) -> tuple:
        """As :meth:`combine` up to the IF stages' input: (the mixer's output, the monitor's
        (spectrum, samples) pairs to feed with :func:`~sdrx.receiver.monitor.feed_spectra`)."""
        fe = self.front
        pairs = self.monitor.take(outs[fe._n_own:]) if len(outs) > fe._n_own else []
        return fe._mix(outs[:fe._n_own]), pairs

    def flush(self) -> np.ndarray:
        return self.tail


def if_stages_together(fronts, us) -> list:
    """Every station's IF stages on its mixer output ``us[i]``, as each ``fronts[i]._if_stages`` would.

    Stations whose stages share one design (the same second-order sections: the same chain, at the
    same channel rate, whatever the tuning) and whose inputs are equally long run as one 2-D
    ``scipy.signal.sosfilt`` over a stations × samples array, each row with its own state: the same
    recursion on each row, so the same samples, in one call instead of one per station.
    """
    from scipy import signal

    out = list(us)
    alike: dict = {}
    for i, (fe, u) in enumerate(zip(fronts, us)):
        if len(u):
            alike.setdefault((fe.sos.shape, fe.sos.tobytes(), len(u)), []).append(i)
    for members in alike.values():
        if len(members) == 1:
            i = members[0]
            out[i] = fronts[i]._if_stages(us[i])
            continue
        x = np.stack([us[i] for i in members])
        zi = np.stack([fronts[i].zi for i in members], axis=1)        # (sections, stations, 2)
        y, zf = signal.sosfilt(fronts[members[0]].sos, x, axis=-1, zi=zi)
        for k, i in enumerate(members):
            fronts[i].zi = zf[:, k, :].copy()
            out[i] = fronts[i]._delay(y[k])
    return out


class StationReceiver(Receiver):
    """One station of a :class:`MultiReceiver`: a fast-path Receiver fed its IF output from outside.

    Parameters
    ----------
    design, info, tune_hz, first_sample, full_scale_dbm
        As for :class:`~sdrx.receiver.Receiver` (the fast path).
    """

    def __init__(self, design, info, tune_hz: float, first_sample: int = 0, full_scale_dbm=None):
        super().__init__(design, info, tune_hz, path="fast", first_sample=first_sample, thermal_noise=False,
                         full_scale_dbm=full_scale_dbm)
        self.banked = _BankedFront(self.front, self.monitor)
        self.front = self.banked
        self._started = True          # the MultiReceiver runs the pre-roll for every station
        self.blanker = None           # and the blanker, once on the capture (MultiReceiver.blanker)
        self._skip_ch = 0             # bank output before this station's own pre-roll starts

    def feed(self, n_in: int, u: np.ndarray) -> np.ndarray:
        """Account for ``n_in`` capture samples whose IF output is ``u``; return the audio completed."""
        return self.deliver(n_in, len(u), self.backend.process(u))

    def deliver(self, n_in: int, n_u: int, audio: np.ndarray) -> np.ndarray:
        """Account for ``n_in`` capture samples whose IF output (``n_u`` samples) the back end has made
        into ``audio`` (alone, or with other stations'); return the audio kept."""
        self._n_in += n_in
        self._n_u += n_u
        return self._out(audio)

    def finish(self, tail_u: np.ndarray) -> np.ndarray:
        """End of input: the IF output's tail in, the remaining audio out (as :meth:`Receiver.flush`)."""
        self.banked.tail = tail_u
        return self.flush()

    def restart_statistics(self) -> None:
        """Forget the AGC gain range seen so far (a segment's statistics start after its overlap)."""
        self.backend.agc.gain_min_db = math.inf
        self.backend.agc.gain_max_db = -math.inf


class _Group:
    """Stations sharing one channel plan, and the bank that serves them."""

    def __init__(self, members, info, first_sample, preroll_n):
        self.members = members                       # indices into MultiReceiver.stations
        self.rows = []                               # each member's rows in the bank
        tables, seen = [], {}
        for rx in members:
            # a channel two stations both need (one's image monitor at the other's tune) is cut once
            rows = []
            for t in rx.banked.front.channelizer.tables:
                rows.append(seen.setdefault(_table_key(t), len(tables)))
                if rows[-1] == len(tables):
                    tables.append(t)
            self.rows.append(rows)
        first = members[0].banked.front
        self.bank = ChannelBank(first.plan, info.kind == "iq", tables, first_sample=first_sample - preroll_n,
                                dtype=first.channelizer.dtype)

    def stations(self, y) -> list:
        """The bank's output for one block -> every member's IF output (mixers, monitors, IF stages)."""
        mixed = [rx.banked.mix(self._own(rx, [y[r] for r in rows])) for rx, rows in zip(self.members, self.rows)]
        feed_spectra([pair for _, pairs in mixed for pair in pairs])     # every station's monitor at once
        return if_stages_together([rx.banked.front for rx in self.members], [u for u, _ in mixed])

    @staticmethod
    def _own(rx, outs) -> list:
        """Leave out the bank's output before this station's pre-roll starts."""
        if rx._skip_ch and len(outs[0]):
            k = min(rx._skip_ch, len(outs[0]))
            rx._skip_ch -= k
            outs = [o[k:] for o in outs]
        return outs

    def front_tail(self) -> list:
        # as FastFrontEnd.flush: P zeros through the channels, then the bank's own flush
        a = self.bank.process(np.zeros(self.bank.plan.overlap, self.bank.dtype))
        b = self.bank.flush()
        out = []
        for rx, rows in zip(self.members, self.rows):
            fe = rx.banked.front
            parts = [rx.banked.combine([a[r] for r in rows]), rx.banked.combine([b[r] for r in rows])]
            rest, fe._held = fe._held, np.zeros(0, complex)   # a long chain's delay line, as FastFrontEnd.flush
            out.append(np.concatenate(parts + [rest]))
        return out


def _table_key(t) -> tuple:
    """Channels with equal keys have equal tables, so equal outputs: the bank computes them once."""
    return t.k_c, t.eps, t.keep0, t.idx.tobytes(), t.H.tobytes(), t.col_phasor.tobytes()


class MultiReceiver:
    """Stateful receiver of many stations of one capture: capture samples in, each station's audio out.

    Parameters
    ----------
    stations : sequence of (ChainDesign, float)
        Each station's chain design and tuning (carrier frequency, Hz).
    info : CaptureInfo or similar
        As for :class:`~sdrx.receiver.Receiver`.
    first_sample : int
        Absolute index of the first sample fed (an excerpt or a segment keeps
        the whole capture's oscillator phases and AGC grid).
    full_scale_dbm : float, optional
        Antenna power of a full-scale carrier for this capture, for every
        station (``--full-scale-dbm``; overrides each spec's ``frontend.full_scale_dbm``).

    Raises
    ------
    ParameterError
        From any station's :class:`~sdrx.receiver.Receiver` (tuning outside
        the capture, LO at or below 0 Hz).

    Notes
    -----
    Each block passes a three-stage pipeline: the channel banks run on it in
    one worker thread while the stations' fronts (mixers, monitors, IF stages)
    run on the previous block in another and the back ends on the block before
    that in the caller's thread (numpy and scipy release the interpreter in
    their array loops, so the stages share the cores). The audio returned
    therefore lags by two blocks; :meth:`flush` returns the rest. Each stage
    keeps its own state and runs its blocks in order, so the output does not
    depend on the block size or the threading.

    Examples
    --------
    >>> import numpy as np
    >>> from sdrx.capture.meta import CaptureInfo
    >>> from sdrx.chain import design_chain
    >>> from pathlib import Path
    >>> info = CaptureInfo(Path("x"), Path("x"), 480e3, 1.0e6, "iq", "cf32_le", 48000)
    >>> d = design_chain("medium")
    >>> mr = MultiReceiver([(d, 0.95e6), (d, 1.05e6)], info)
    >>> n = np.arange(48000)
    >>> x = (0.1 * np.exp(2j * np.pi * 50e3 * n / 480e3)).astype(np.complex64)
    >>> out = [np.concatenate([a, b]) for a, b in zip(mr.process(x), mr.flush())]
    >>> [len(a) for a in out]
    [4800, 4800]
    """

    def __init__(self, stations: Sequence, info, first_sample: int = 0, full_scale_dbm=None):
        self.info = info
        self.first_sample = int(first_sample)
        self.stations = [StationReceiver(d, info, tune, first_sample=first_sample, full_scale_dbm=full_scale_dbm)
                         for d, tune in stations]
        self.noise = _shared_noise(self.stations, info)
        self.blanker = _shared_blanker(self.stations, info, first_sample)
        # one pre-roll for all: the longest any station needs; each station starts on it at its own
        from .preroll import preroll_samples

        rates = sorted({r for rx in self.stations for r in (rx.fs_ch, rx.audio_fs)})
        hop = math.lcm(*{rx.plan.hop for rx in self.stations})
        self.preroll_n = preroll_samples(max(rx._pre_n for rx in self.stations) / info.fs, info.fs, *rates,
                                         multiple_of=hop)
        for rx in self.stations:
            rx._skip_ch = int(round((self.preroll_n - rx._pre_n) * rx.fs_ch / info.fs))
        self._head, self._head_n, self._head_in, self._started = [], 0, 0, False
        self._estimate_n = self.stations[0]._estimate_n
        by_rate: dict = {}
        for rx in self.stations:
            by_rate.setdefault(rx.fs_ch, []).append(rx)
        self.groups = [_Group(m, info, first_sample, self.preroll_n) for m in by_rate.values()]
        self._order = [self.stations.index(rx) for g in self.groups for rx in g.members]
        self._pools = None        # the bank's thread and the stations' fronts' thread
        self._banked = None       # (n_in, future of the banks' outputs) of the previous block
        self._fronted = None      # (n_in, future of the IF outputs) of the block before that
        self._flushed = False
        self._mark = None         # capture sample at which the statistics restart
        self._n_fed = 0

    def restart_statistics_at(self, sample: int) -> None:
        """Restart every station's AGC gain range at this absolute capture sample (a segment's start)."""
        self._mark = int(sample)

    def _banks(self, block) -> list:
        return [g.bank.process(block) for g in self.groups]

    def _fronts(self, banked) -> list:
        ys = banked.result()
        return self._in_order([u for g, y in zip(self.groups, ys) for u in g.stations(y)])

    def _front_tail(self) -> list:
        return self._in_order([u for g in self.groups for u in g.front_tail()])

    def _in_order(self, us) -> list:
        out = [None] * len(us)
        for k, i in enumerate(self._order):
            out[i] = us[k]
        return out

    def _back_ends(self, n_in: int, us) -> list:
        """Each station's back end on its IF output; the stations of one chain as one
        (:func:`~sdrx.receiver.backend_batch.process_together`: one array operation per stage over them).

        In the chunk where a segment's statistics restart, each station steps alone (split at the mark).
        """
        if self._mark is not None and any(self._split(i, len(u)) is not None for i, u in enumerate(us)):
            return [self._feed(i, n_in, u) for i, u in enumerate(us)]
        audio = process_together([rx.backend for rx in self.stations], us)
        return [rx.deliver(n_in, len(u), a) for rx, u, a in zip(self.stations, us, audio)]

    def _feed(self, i: int, n_in: int, u) -> np.ndarray:
        rx = self.stations[i]
        k = self._split(i, len(u))
        if k is None:
            return rx.feed(n_in, u)
        a = rx.feed(n_in, u[:k])
        rx.restart_statistics()
        b = rx.feed(0, u[k:])
        return np.concatenate([a, b])

    def _split(self, i: int, n: int):
        """Where in this chunk the statistics restart (None when not inside it)."""
        if self._mark is None:
            return None
        rx = self.stations[i]
        k_mark = int(round((self._mark - self.first_sample) * rx.fs_ch / self.info.fs))
        k = k_mark - rx._n_u             # the IF samples this station's back end has had
        return k if 0 <= k < n or (k == n == 0) else None

    def process(self, block: np.ndarray) -> list:
        """Feed capture samples; return each station's audio completed so far (a list of arrays)."""
        if self._flushed:
            raise RuntimeError("MultiReceiver already flushed")
        if self.noise is not None:
            block = self.noise.add(block, self.first_sample + self._n_fed)
        self._n_fed += len(block)
        n_in = len(block)
        if self.blanker is not None:
            block = self.blanker.process(block)   # it holds back its look-ahead; the count stays the input's
        if not self._started:
            self._head.append(np.array(block))
            self._head_n += len(block)
            self._head_in += n_in
            if self._head_n < self._estimate_n:
                return [np.zeros(0) for _ in self.stations]
            return self._start()
        return self._process(block, n_in)

    def _start(self) -> list:
        """The shared pre-roll (the carriers near every station's channels), then the head samples."""
        from .preroll import carrier_history, estimate_carriers

        self._started = True
        head = np.concatenate(self._head) if self._head else np.zeros(0, self.stations[0].front.front.channelizer.dtype)
        self._head = []
        is_complex = self.info.kind != "real"
        carriers = estimate_carriers(head[:self._estimate_n], self.info.fs, is_complex)
        windows = [w for rx in self.stations for w in rx._carrier_windows()]
        history = carrier_history(carriers, self.preroll_n, self.info.fs, is_complex,
                                  near_hz=windows).astype(head.dtype)
        outs = [self._process(history, 0)]
        if len(head) or self._head_in:
            outs.append(self._process(head, self._head_in))
        return [np.concatenate(parts) for parts in zip(*outs)]

    def _process(self, block: np.ndarray, n_in: int) -> list:
        """A three-stage pipeline: the banks on this block (a thread), the stations' fronts on the
        previous one (another thread), the back ends on the one before (here); each stage in order."""
        if self._pools is None:
            from concurrent.futures import ThreadPoolExecutor

            self._pools = [ThreadPoolExecutor(max_workers=1, thread_name_prefix=f"sdrx-band-{name}")
                           for name in ("bank", "front")]
        banked = (n_in, self._pools[0].submit(self._banks, block))
        fronted = None
        if self._banked is not None:
            n_prev, fut = self._banked
            fronted = (n_prev, self._pools[1].submit(self._fronts, fut))
        out = self._back_ends(self._fronted[0], self._fronted[1].result()) if self._fronted is not None else None
        self._banked, self._fronted = banked, fronted
        return out if out is not None else [np.zeros(0) for _ in self.stations]

    def _drain(self) -> list:
        """The back ends on the blocks still in the pipeline, oldest first."""
        outs = []
        if self._fronted is not None:
            outs.append(self._back_ends(self._fronted[0], self._fronted[1].result()))
        if self._banked is not None:
            outs.append(self._back_ends(self._banked[0], self._fronts(self._banked[1])))
        self._banked = self._fronted = None
        if not outs:
            return [np.zeros(0) for _ in self.stations]
        return [np.concatenate(parts) for parts in zip(*outs)]

    def flush(self) -> list:
        """End of input: each station's remaining audio (totals are duration × audio rate)."""
        first = self._start() if not self._started else [np.zeros(0) for _ in self.stations]
        if self.blanker is not None:
            # the samples the blanker held back (its look-ahead), as Receiver.flush does
            first = [np.concatenate([a, b]) for a, b in zip(first, self._process(self.blanker.flush(), 0))]
        self._flushed = True
        head = [np.concatenate([a, b]) for a, b in zip(first, self._drain())]
        tails = self._front_tail()
        try:
            return [np.concatenate([h, rx.finish(t)]) for h, rx, t in zip(head, self.stations, tails)]
        finally:
            self.close()

    def close(self) -> None:
        """Stop the worker thread (also after an error part-way through); idempotent."""
        for pool in self._pools or ():
            pool.shutdown(wait=True, cancel_futures=True)
        self._pools = None
        if self.noise is not None:
            self.noise.close()


def _shared_blanker(stations, info, first_sample):
    """The noise blanker, run once on the capture samples: every station's spec must give the same one
    (its fill does not depend on the tuning, so one blanker serves all)."""
    from ..dsp.blanker import NoiseBlanker
    from ..errors import ParameterError

    specs = {rx.design.blanker for rx in stations}
    if len(specs) > 1:
        raise ParameterError("--chain: the chains' [blanker] differ; the blanker works on the capture itself, "
                             "ahead of every station, so give every chain the same")
    spec = specs.pop()
    return NoiseBlanker(spec, info.fs, first_sample) if spec.enabled else None


def _shared_noise(stations, info):
    """The front ends' thermal noise, added once to the capture: every station's spec must give the
    same noise (noise figure, full scale, seed), as one recording has one front end."""
    from ..errors import ParameterError
    from .receiver import Receiver

    sources = []
    for rx in stations:
        fe = rx.design.frontend
        sources.append((fe.noise_figure_db, rx.full_scale_dbm, fe.seed))
    if all(s[0] is None for s in sources):
        return None
    if len(set(sources)) > 1:
        raise ParameterError("--chain: the chains' [frontend] noise differs (noise_figure_db, full_scale_dbm, seed); "
                             "one capture is received through one front end, so give every chain the same")
    rx = stations[0]
    return Receiver._thermal_noise(rx, rx.design.frontend, info)
