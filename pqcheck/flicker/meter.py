"""IEC 61000-4-15 flickermeter: instantaneous flicker sensation Pinst, Pst and Plt.

The signal chain of IEC 61000-4-15:2010 (Ed. 2.0), clause 4 and its Figure 1, built from
scipy.signal second-order sections and run block by block (bounded memory):

* **Block 1, input voltage adaptor.** The chain works on the squared input ``u^2``. It is
  normalised by a reference mean square: by default the standard's adaptor, a first-order
  low-pass filter with a 1-minute time constant of the demodulated mean square (``reference =
  "adaptive"``), or a fixed reference ``reference_v`` (a steady reference, e.g. the nominal
  voltage). Dividing ``u^2`` by ``U_ref^2`` is the same as scaling ``u`` to ``U_ref`` first.
* **Block 2, squaring demodulator.** ``u^2``.
* **Block 3, weighting filters.** A 6th-order Butterworth low-pass at 35 Hz (50 Hz systems) or
  42 Hz (60 Hz systems) removes the carrier at twice the fundamental, at the input rate; the
  output is then decimated by an integer factor to the internal rate ``fs_int_hz`` (>= 800 Hz,
  where the Butterworth stage has attenuated everything above half the new rate by more than
  120 dB). At the internal rate: a first-order high-pass at 0.05 Hz and the lamp-eye-brain
  weighting filter

      F(s) = k w1 s / (s^2 + 2 lambda s + w1^2) * (1 + s/w2) / ((1 + s/w3)(1 + s/w4))

  with the standard's coefficients for the 230 V / 60 W and the 120 V / 60 W incandescent
  lamps (:data:`LAMPS`). The analogue filters are discretised by the bilinear transform with
  the frequency prewarped at 8.8 Hz (the reference frequency), so the digital response is
  exact there; at 800 Hz the warping elsewhere below 35 Hz stays under 0.7 %.
* **Block 4, squaring and smoothing.** The weighted signal is squared and smoothed by a
  first-order low-pass with a 300 ms time constant, then scaled so that the reference
  fluctuation (sinusoidal 8.8 Hz modulation of 0.250 % for the 230 V lamp, 0.321 % for the
  120 V lamp, Tables 1a/1b) gives a maximum Pinst of 1.00. The scale is computed from the
  digital filters' own responses at the reference point (closed form, see
  :func:`_pinst_scale`), not tuned to any test value.
* **Block 5, statistics.** Pinst samples of each 10-minute interval go into a classifier of
  log-spaced classes (200 per decade from 1e-6 to 1e6, 2400 classes, far above the
  standard's 64-class minimum); percentiles are read from the cumulative counts with
  interpolation inside a class. Pst uses the smoothed percentiles of clause 5.7.2:

      Pst = sqrt(0.0314 P0.1 + 0.0525 P1s + 0.0657 P3s + 0.28 P10s + 0.08 P50s)

  and Plt the cube-root mean of 12 consecutive Pst values (clause 5.7.3).

References
----------
IEC 61000-4-15:2010+AMD1:2010, Electromagnetic compatibility - Testing and measurement
techniques - Flickermeter - Functional and design specifications, clauses 4 and 5.
"""

from __future__ import annotations

from dataclasses import dataclass
from functools import lru_cache

import numpy as np
from scipy import signal

from ..errors import AnalysisError

__all__ = [
    "Lamp",
    "LAMPS",
    "FlickerResult",
    "Flickermeter",
    "flickermeter",
    "pst_from_percentiles",
    "plt_from_pst",
    "lamp_for",
]

PST_INTERVAL_S = 600.0
"""Short-term observation interval of IEC 61000-4-15 clause 5.7.2. [s]"""

PLT_COUNT = 12
"""Number of consecutive Pst values per Plt (2 h), clause 5.7.3. [unitless]"""

REFERENCE_FREQUENCY_HZ = 8.8
"""Modulation frequency of the Pinst = 1 reference point (Tables 1a/1b). [Hz]"""

ADAPTOR_TIME_CONSTANT_S = 60.0
"""Time constant of the input voltage adaptor's low-pass filter (clause 4.2). [s]"""

SMOOTHING_TIME_CONSTANT_S = 0.3
"""Block 4 sliding mean (first-order low-pass) time constant. [s]"""

HIGHPASS_HZ = 0.05
"""Block 3 first-order high-pass cut-off. [Hz]"""

MIN_INTERNAL_RATE_HZ = 800.0
"""Lowest internal rate after decimation. [Hz]"""

# classifier: log-spaced classes
_CLASS_LO = -6.0
_CLASS_HI = 6.0
_PER_DECADE = 200
_N_CLASSES = int((_CLASS_HI - _CLASS_LO) * _PER_DECADE)

# (percent exceeded, weight) groups of the smoothed percentiles, clause 5.7.2
_PST_TERMS = (
    (0.0314, (0.1,)),
    (0.0525, (0.7, 1.0, 1.5)),
    (0.0657, (2.2, 3.0, 4.0)),
    (0.28, (6.0, 8.0, 10.0, 13.0, 17.0)),
    (0.08, (30.0, 50.0, 80.0)),
)
PERCENTILES = tuple(sorted({p for _, ps in _PST_TERMS for p in ps}))
"""Percentiles (of time exceeded) the Pst formula needs. [%]"""


@dataclass(frozen=True)
class Lamp:
    """Lamp-eye-brain weighting filter of IEC 61000-4-15 (clause 4.4, Block 3).

    Attributes
    ----------
    name : str
        ``"230V"`` or ``"120V"``.
    k : float
        Gain factor. [unitless]
    lambda_hz, f1_hz, f2_hz, f3_hz, f4_hz : float
        lambda / 2 pi and the corner frequencies w1..w4 / 2 pi. [Hz]
    reference_dvv_percent : float
        Sinusoidal 8.8 Hz fluctuation giving Pinst = 1 (Table 1a/1b). [%]
    """

    name: str
    k: float
    lambda_hz: float
    f1_hz: float
    f2_hz: float
    f3_hz: float
    f4_hz: float
    reference_dvv_percent: float

    def analog_zpk(self):
        """Zeros, poles and gain of F(s) (angular frequencies). [rad/s]"""
        lam = 2 * np.pi * self.lambda_hz
        w1, w2, w3, w4 = (2 * np.pi * f for f in (self.f1_hz, self.f2_hz, self.f3_hz, self.f4_hz))
        # k w1 s (1 + s/w2) / ((s^2 + 2 lam s + w1^2)(1 + s/w3)(1 + s/w4))
        zeros = np.array([0.0, -w2])
        poles = np.concatenate([np.roots([1.0, 2 * lam, w1**2]), [-w3, -w4]])
        gain = self.k * w1 * w3 * w4 / w2
        return zeros, poles, gain


LAMPS = {
    # IEC 61000-4-15:2010 clause 4.4, Block 3 (the 230 V and 120 V, 60 W lamp coefficients)
    "230V": Lamp("230V", 1.74802, 4.05981, 9.15494, 2.27979, 1.22535, 21.9, 0.250),
    "120V": Lamp("120V", 1.6357, 4.167375, 9.077169, 2.939902, 1.394468, 17.31512, 0.321),
}
"""The two lamps of the standard, by name."""


def lamp_for(nominal_v: float) -> str:
    """Lamp that suits a supply of ``nominal_v``: the 120 V lamp below 180 V, else 230 V. [V]"""
    return "120V" if nominal_v < 180.0 else "230V"


@dataclass(frozen=True)
class FlickerResult:
    """Output of the flickermeter for one channel.

    Attributes
    ----------
    lamp : str
        Lamp and supply, e.g. ``"230V/50Hz"``.
    pst : tuple of float
        One Pst per short-term interval (NaN where the interval held unusable samples).
        [unitless]
    interval_s : float
        Length of the short-term intervals: 600 s, or the whole usable capture when it is
        shorter than 600 s (then ``pst`` has one value). [s]
    complete_intervals : bool
        True when ``interval_s`` is the standard's 10 minutes.
    plt : tuple of float
        One Plt per 12 consecutive complete Pst values (empty when fewer). [unitless]
    pinst_max : float
        Largest Pinst over the capture. [unitless]
    pinst : numpy.ndarray
        Pinst maximum over each ``pinst_step_s`` step (for charts). [unitless]
    pinst_step_s : float
        Step of ``pinst``. [s]
    fs_int_hz : float
        Internal rate of Blocks 3 to 5. [Hz]
    reference : str
        ``"adaptive"`` (1-minute adaptor) or ``"fixed <V> V"``.
    invalid_intervals : tuple of int
        Indices of intervals that contained non-finite samples.
    """

    lamp: str
    pst: tuple
    interval_s: float
    complete_intervals: bool
    plt: tuple
    pinst_max: float
    pinst: np.ndarray
    pinst_step_s: float
    fs_int_hz: float
    reference: str
    invalid_intervals: tuple = ()


def _bilinear_sos(zeros, poles, gain, fs_hz, prewarp_hz):
    """Bilinear transform of an analogue zpk with prewarping at ``prewarp_hz``."""
    w = 2 * np.pi * prewarp_hz
    fs_eff = w / (2.0 * np.tan(w / (2.0 * fs_hz)))
    z, p, k = signal.bilinear_zpk(zeros, poles, gain, fs_eff)
    return signal.zpk2sos(z, p, k)


def _lowpass_cutoff_hz(nominal_hz: float) -> float:
    # IEC 61000-4-15:2010 Block 3: 35 Hz for 50 Hz systems, 42 Hz for 60 Hz systems
    return 35.0 if nominal_hz == 50 else 42.0


@dataclass(frozen=True)
class _Design:
    fs_hz: float
    q: int
    fs_int_hz: float
    sos_bw: np.ndarray
    sos_hp: np.ndarray
    sos_w: np.ndarray
    sos_smooth: np.ndarray
    ba_adaptor: tuple
    scale: float


@lru_cache(maxsize=32)
def _design(fs_hz: float, nominal_hz: float, lamp: Lamp) -> _Design:
    q = max(1, int(fs_hz // MIN_INTERNAL_RATE_HZ))
    fi = fs_hz / q
    sos_bw = signal.butter(6, _lowpass_cutoff_hz(nominal_hz), "low", fs=fs_hz, output="sos")
    # first-order high-pass 0.05 Hz: s / (s + wc)
    wc = 2 * np.pi * HIGHPASS_HZ
    sos_hp = _bilinear_sos(np.array([0.0]), np.array([-wc]), 1.0, fi, REFERENCE_FREQUENCY_HZ)
    sos_w = _bilinear_sos(*lamp.analog_zpk(), fi, REFERENCE_FREQUENCY_HZ)
    # first-order low-pass, time constant tau: 1 / (1 + s tau)
    tau = SMOOTHING_TIME_CONSTANT_S
    sos_smooth = _bilinear_sos(np.array([]), np.array([-1.0 / tau]), 1.0 / tau, fi,
                               REFERENCE_FREQUENCY_HZ)
    # the adaptor's 1-minute low-pass, exact first-order recursion
    a = np.exp(-1.0 / (fi * ADAPTOR_TIME_CONSTANT_S))
    ba_adaptor = (np.array([1.0 - a]), np.array([1.0, -a]))
    scale = _pinst_scale(fs_hz, fi, sos_bw, sos_hp, sos_w, sos_smooth, lamp)
    return _Design(fs_hz, q, fi, sos_bw, sos_hp, sos_w, sos_smooth, ba_adaptor, scale)


def _gain(sos, f_hz, fs_hz):
    _, h = signal.sosfreqz(sos, worN=[f_hz], fs=fs_hz)
    return float(np.abs(h[0]))


def _pinst_scale(fs_hz, fi, sos_bw, sos_hp, sos_w, sos_smooth, lamp):
    """Block 4 scale: the reference fluctuation gives a maximum Pinst of exactly 1.

    A sinusoidal fluctuation ``u = U (1 + m/2 sin(2 pi f t)) sin(w0 t)`` of relative
    peak-to-peak size ``m`` gives, after normalisation and squaring, a component of amplitude
    ``m`` at ``f`` (plus ``m^2/4`` terms, negligible). Through Block 3 (gain ``G``) and the
    squarer it gives ``(m G)^2 / 2 (1 - cos(4 pi f t))``; the 300 ms low-pass keeps the mean
    and a fraction ``L`` of the ripple at ``2 f``, so the maximum is ``(m G)^2 / 2 (1 + L)``.
    """
    f = REFERENCE_FREQUENCY_HZ
    m = lamp.reference_dvv_percent / 100.0
    g = _gain(sos_bw, f, fs_hz) * _gain(sos_hp, f, fi) * _gain(sos_w, f, fi)
    ripple = _gain(sos_smooth, 2 * f, fi)
    return 2.0 / ((m * g) ** 2 * (1.0 + ripple))


def pst_from_percentiles(p: dict) -> float:
    """Pst from the percentiles of Pinst (IEC 61000-4-15:2010 clause 5.7.2).

    Parameters
    ----------
    p : dict
        Percentile (percent of time exceeded, as in :data:`PERCENTILES`) -> level. [unitless]

    Returns
    -------
    float
        ``sqrt(0.0314 P0.1 + 0.0525 P1s + 0.0657 P3s + 0.28 P10s + 0.08 P50s)``, the smoothed
        values being the means of their groups. [unitless]
    """
    total = 0.0
    for weight, group in _PST_TERMS:
        total += weight * float(np.mean([p[x] for x in group]))
    return float(np.sqrt(max(total, 0.0)))


def plt_from_pst(pst) -> float:
    """Plt: cube root of the mean of the cubed Pst values (clause 5.7.3). [unitless]"""
    a = np.asarray(pst, dtype=float)
    return float(np.cbrt(np.mean(a**3)))


class _Classifier:
    """Log-spaced class counts of Pinst over one interval."""

    def __init__(self):
        self.counts = np.zeros(_N_CLASSES + 1, dtype=np.int64)  # [0] = below the first class
        self.n = 0

    def add(self, x):
        if x.size == 0:
            return
        with np.errstate(divide="ignore", invalid="ignore"):
            pos = (np.log10(np.maximum(x, 1e-300)) - _CLASS_LO) * _PER_DECADE
        idx = np.clip(np.floor(pos), -1, _N_CLASSES - 1).astype(np.int64) + 1
        self.counts += np.bincount(idx, minlength=_N_CLASSES + 1)
        self.n += x.size

    def percentiles(self) -> dict:
        """Level exceeded for each percentage of the samples in :data:`PERCENTILES`."""
        if self.n == 0:
            return {p: float("nan") for p in PERCENTILES}
        # exceed[j] = number of samples in classes >= j
        exceed = np.cumsum(self.counts[::-1])[::-1]
        out = {}
        for p in PERCENTILES:
            target = p / 100.0 * self.n
            # highest class j whose samples from j upwards reach the target
            j = int(np.searchsorted(-exceed, -target, side="right")) - 1
            j = max(j, 0)
            if j == 0:
                out[p] = 0.0
                continue
            above = exceed[j + 1] if j + 1 < exceed.size else 0
            inside = self.counts[j]
            frac = 1.0 - (target - above) / inside if inside else 0.0
            lo = _CLASS_LO + (j - 1) / _PER_DECADE
            out[p] = float(10.0 ** (lo + frac / _PER_DECADE))
        return out


class Flickermeter:
    """Block-by-block IEC 61000-4-15 flickermeter for one voltage signal.

    Feed consecutive blocks of samples with :meth:`feed`, then call :meth:`finish`.

    Parameters
    ----------
    fs_hz : float
        Sample rate of the input. [Hz]
    nominal_hz : int
        Supply frequency, 50 or 60 (sets the 35 Hz or 42 Hz Block 3 low-pass). [Hz]
    lamp : str
        ``"230V"`` or ``"120V"`` (:data:`LAMPS`).
    reference_v : float or None
        Fixed reference rms voltage (a steady reference); None uses the standard's 1-minute
        adaptor. [V]
    interval_s : float
        Short-term interval. [s]

    Raises
    ------
    AnalysisError
        For an unknown lamp, a nominal frequency other than 50 or 60 Hz, or a sample rate
        below 8 times the nominal frequency.
    """

    def __init__(self, fs_hz, *, nominal_hz=50, lamp="230V", reference_v=None,
                 interval_s=PST_INTERVAL_S, pinst_step_s=0.1):
        if lamp not in LAMPS:
            raise AnalysisError(f"unknown lamp {lamp!r}; choose one of {sorted(LAMPS)}",
                                field="lamp")
        if nominal_hz not in (50, 60):
            raise AnalysisError(f"the flickermeter is specified for 50 or 60 Hz supplies, "
                                f"got {nominal_hz!r}", field="nominal_hz")
        if not np.isfinite(fs_hz) or fs_hz < 8 * nominal_hz:
            raise AnalysisError(
                f"sample rate {fs_hz:g} Hz is too low for the flickermeter; it needs at least "
                f"{8 * nominal_hz} Hz (8 samples per cycle) to demodulate the supply",
                field="sample_rate_hz")
        if reference_v is not None and not (np.isfinite(reference_v) and reference_v > 0):
            raise AnalysisError(f"reference_v must be a positive voltage, got {reference_v!r}",
                                field="reference_v")
        self.lamp = LAMPS[lamp]
        self.nominal_hz = int(nominal_hz)
        self.reference_v = reference_v
        self.d = _design(float(fs_hz), self.nominal_hz, self.lamp)
        self.interval_n = int(round(interval_s * self.d.fs_int_hz))
        self.step_n = max(1, int(round(pinst_step_s * self.d.fs_int_hz)))
        self._started = False
        self._phase = 0  # input samples to skip before the next decimated sample
        self._classifier = _Classifier()
        self._in_interval = 0
        self._interval_bad = False
        self._pst = []
        self._bad = []
        self._pinst_max = 0.0
        self._steps = []
        self._step_buf = np.empty(0)
        self._n_int = 0
        self._last_ms = None

    # -- state ------------------------------------------------------------------------------
    def _start(self, u2):
        """Initialise every filter in the steady state of the record's first cycle.

        The first cycle of ``u^2`` is repeated for one second through the Butterworth stage
        (a pre-roll whose output is discarded), so that the carrier at twice the supply
        frequency does not start with a step; the adaptor, high-pass and weighting stages
        start at rest on the resulting mean square.
        """
        d = self.d
        n_c = max(1, int(round(d.fs_hz / self.nominal_hz)))
        cycle = u2[:n_c]
        x0 = float(np.mean(cycle)) if cycle.size else 1.0
        if not np.isfinite(x0) or x0 <= 0:
            x0, cycle = 1.0, np.ones(1)
        zi = signal.sosfilt_zi(d.sos_bw) * x0
        reps = int(np.ceil(d.fs_hz / cycle.size))
        _, self._zi_bw = signal.sosfilt(d.sos_bw, np.tile(cycle, reps), zi=zi)
        ref0 = x0 if self.reference_v is None else self.reference_v**2
        self._zi_ad = signal.lfilter_zi(*d.ba_adaptor) * ref0
        self._zi_hp = signal.sosfilt_zi(d.sos_hp) * (x0 / ref0)
        self._zi_w = np.zeros((d.sos_w.shape[0], 2))
        self._zi_sm = np.zeros((d.sos_smooth.shape[0], 2))
        self._last_ms = x0
        self._started = True

    def feed(self, x) -> None:
        """Process the next block of input samples. [V]"""
        x = np.asarray(x, dtype=np.float64)
        if x.size == 0:
            return
        u2 = x * x
        bad = ~np.isfinite(u2)
        if not self._started:
            good = u2[~bad]
            self._start(good if good.size else np.ones(1))
        if bad.any():
            # hold the running mean square over unusable samples; their intervals are flagged
            u2 = np.where(bad, self._last_ms, u2)
        d = self.d
        y, self._zi_bw = signal.sosfilt(d.sos_bw, u2, zi=self._zi_bw)
        ydec = y[self._phase::d.q]
        bdec = None
        if bad.any():
            # a decimated sample is unusable when any input sample since the previous one was
            idx = np.arange(self._phase, x.size, d.q)
            cb = np.concatenate([[0], np.cumsum(bad)])
            lo = np.maximum(idx - d.q + 1, 0)
            bdec = (cb[idx + 1] - cb[lo]) > 0
        self._phase = (self._phase - x.size) % d.q
        if ydec.size == 0:
            return
        self._last_ms = float(ydec[-1])
        if self.reference_v is None:
            ref, self._zi_ad = signal.lfilter(*d.ba_adaptor, ydec, zi=self._zi_ad)
        else:
            ref = self.reference_v**2
        yn = ydec / ref
        yh, self._zi_hp = signal.sosfilt(d.sos_hp, yn, zi=self._zi_hp)
        yw, self._zi_w = signal.sosfilt(d.sos_w, yh, zi=self._zi_w)
        ys, self._zi_sm = signal.sosfilt(d.sos_smooth, yw * yw, zi=self._zi_sm)
        pinst = d.scale * ys
        self._classify(pinst, bdec)
        self._pinst_max = max(self._pinst_max, float(np.max(pinst)))
        self._chart(pinst)
        self._n_int += pinst.size

    def _classify(self, pinst, bad):
        start = 0
        while start < pinst.size:
            take = min(pinst.size - start, self.interval_n - self._in_interval)
            part = pinst[start:start + take]
            self._classifier.add(part)
            if bad is not None and bad[start:start + take].any():
                self._interval_bad = True
            self._in_interval += take
            start += take
            if self._in_interval == self.interval_n:
                self._close_interval()

    def _close_interval(self):
        if self._interval_bad:
            self._bad.append(len(self._pst))
            self._pst.append(float("nan"))
        else:
            self._pst.append(pst_from_percentiles(self._classifier.percentiles()))
        self._classifier = _Classifier()
        self._in_interval = 0
        self._interval_bad = False

    def _chart(self, pinst):
        buf = np.concatenate([self._step_buf, pinst])
        n = (buf.size // self.step_n) * self.step_n
        if n:
            self._steps.append(buf[:n].reshape(-1, self.step_n).max(axis=1))
        self._step_buf = buf[n:]

    def finish(self) -> FlickerResult:
        """Close the last interval and return the :class:`FlickerResult`."""
        # an interval short of its length by at most 10 ms (sample-count rounding of a
        # record meant to be whole intervals) still counts as complete
        if self._in_interval and self.interval_n - self._in_interval <= 0.01 * self.d.fs_int_hz:
            self._close_interval()
        complete = bool(self._pst)
        interval_s = self.interval_n / self.d.fs_int_hz
        if not self._pst and self._in_interval > 0:
            # shorter than one interval: one Pst over what there is, its length stated
            interval_s = self._in_interval / self.d.fs_int_hz
            self._close_interval()
        pst = tuple(self._pst)
        plt = tuple(plt_from_pst(pst[i:i + PLT_COUNT])
                    for i in range(0, len(pst) - PLT_COUNT + 1, PLT_COUNT)
                    if complete and all(np.isfinite(pst[i:i + PLT_COUNT])))
        steps = self._steps + ([self._step_buf.max(keepdims=True)] if self._step_buf.size else [])
        chart = np.concatenate(steps) if steps else np.empty(0)
        ref = "adaptive" if self.reference_v is None else f"fixed {self.reference_v:g} V"
        return FlickerResult(
            lamp=f"{self.lamp.name}/{self.nominal_hz}Hz",
            pst=pst,
            interval_s=float(interval_s),
            complete_intervals=complete,
            plt=plt,
            pinst_max=float(self._pinst_max),
            pinst=chart,
            pinst_step_s=self.step_n / self.d.fs_int_hz,
            fs_int_hz=float(self.d.fs_int_hz),
            reference=ref,
            invalid_intervals=tuple(self._bad),
        )


def flickermeter(u, *, fs_hz, nominal_hz=50, lamp="230V", reference_v=None,
                 interval_s=PST_INTERVAL_S, block_samples=1 << 20) -> FlickerResult:
    """Run the IEC 61000-4-15 flickermeter over a whole voltage record.

    Parameters
    ----------
    u : array_like
        Voltage samples. [V]
    fs_hz : float
        Sample rate. [Hz]
    nominal_hz : int
        50 or 60. [Hz]
    lamp : str
        ``"230V"`` or ``"120V"``.
    reference_v : float or None
        Fixed reference voltage, or None for the 1-minute adaptor. [V]
    interval_s : float
        Short-term interval. [s]

    Returns
    -------
    FlickerResult

    Examples
    --------
    A 230 V, 50 Hz supply modulated sinusoidally at 8.8 Hz by 0.25 % gives Pinst max = 1:

    >>> import numpy as np
    >>> fs = 1600.0
    >>> t = np.arange(int(30 * fs)) / fs
    >>> u = 230 * np.sqrt(2) * (1 + 0.0025 / 2 * np.sin(2 * np.pi * 8.8 * t))
    >>> u = u * np.sin(2 * np.pi * 50 * t)
    >>> r = flickermeter(u, fs_hz=fs)
    >>> round(float(r.pinst[-50:].max()), 2)
    1.0
    """
    m = Flickermeter(fs_hz, nominal_hz=nominal_hz, lamp=lamp, reference_v=reference_v,
                     interval_s=interval_s)
    u = np.asarray(u, dtype=np.float64)
    for s in range(0, u.size, block_samples):
        m.feed(u[s:s + block_samples])
    return m.finish()
