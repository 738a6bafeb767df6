"""Off-nominal and drifting fundamental: the synchronous method against a plain FFT.

The sample rates give a non-integer number of samples per cycle (12 345 / 49.5 = 249.39,
10 007 / 50.3 = 198.95, 15 013 / 59.7 = 251.47), so no whole number of samples spans the
10/12 cycles exactly. Accuracy target (issue 2): harmonics within 0.1 % of reading, fundamental
frequency within 0.01 Hz.
"""

from __future__ import annotations

import numpy as np
import pytest
from conftest import fourier_series, six_pulse_spectrum

from pqcheck import Capture, analyze

HARM = {1: (10.0, 0.0), 5: (2.0, 30.0), 7: (1.4, -60.0), 11: (0.9, 100.0), 13: (0.7, 10.0),
        25: (0.3, -45.0), 49: (0.1, 0.0)}

CASES = [
    pytest.param(49.5, 12_345.0, 50, id="49.5Hz"),
    pytest.param(50.3, 10_007.0, 50, id="50.3Hz"),
    pytest.param(59.7, 15_013.0, 60, id="59.7Hz"),
]


@pytest.mark.parametrize("f0, fs, nominal", CASES)
def test_synchronous_method_beats_plain_fft(f0, fs, nominal):
    x = fourier_series(fs, f0, HARM, 1.0, phi0_rad=0.7)
    res = analyze(Capture.from_arrays(fs, currents={"i": x}), nominal_hz=nominal)
    ch = res.channels[0]

    # Plain numpy.fft.rfft of the first 10/12 nominal cycles (0.2 s), unsynchronised, read at
    # the bin nearest each harmonic's true frequency: the record does not hold a whole number
    # of cycles, so every component leaks and scallops (up to 37 % low at 49.5 Hz; DFT of a
    # truncated sinusoid, numpy reference).
    n = int(round((10 if nominal == 50 else 12) / nominal * fs))
    spec = np.fft.rfft(x[:n]) * np.sqrt(2) / n
    plain_err = {}
    for h, (a, _) in HARM.items():
        plain_err[h] = abs(spec[int(round(h * f0 * n / fs))]) / a - 1

    for h, (a, ph) in HARM.items():
        sync_err = ch.harmonic_rms[h] / a - 1
        # issue 2: synchronous method within 0.1 % of reading; the plain FFT figure is stated
        # next to it
        assert abs(sync_err) < 1e-3, (
            f"order {h}: synchronous error {100 * sync_err:+.4f} % (plain FFT "
            f"{100 * plain_err[h]:+.2f} %)")
        # phase relative to the fundamental, cosine basis: the generating phase; 0.1 % of
        # reading as a vector error is 1e-3 rad
        dphi = (ch.phase_deg[h] - ph + 180) % 360 - 180
        assert abs(np.radians(dphi)) < 1e-3, f"order {h}: phase {ch.phase_deg[h]:.4f} deg"
    # the unsynchronised record really does leak: several per cent at the worst order, against
    # < 0.1 % synchronised (figures above)
    assert max(abs(e) for e in plain_err.values()) > 0.05, plain_err

    # fundamental frequency within 0.01 Hz (issue 2), in every window and on average
    assert res.fundamental_hz == pytest.approx(f0, abs=0.01)
    assert res.freq_min_hz == pytest.approx(f0, abs=0.01)
    assert res.freq_max_hz == pytest.approx(f0, abs=0.01)
    # THD from the components (IEEE 519 definition) against the generating amplitudes
    thd = 100 * np.sqrt(sum(a**2 for h, (a, _) in HARM.items() if h > 1)) / HARM[1][0]
    assert ch.thd_percent == pytest.approx(thd, rel=1e-3)


@pytest.mark.parametrize("f0, fs, nominal", CASES)
def test_six_pulse_off_nominal_with_noise(f0, fs, nominal):
    # Ideal six-pulse current I_h/I_1 = 1/h (power-electronics textbook, Mohan et al. -- from
    # memory) with white noise of 0.2 % of the fundamental and a scope offset. Noise adds
    # sigma sqrt(2/N) ~ 6e-4 A per line per window (N ~ 2500) to a 0.2 A order-49 component,
    # so the rms over 5 windows is held to 1 % there (the tolerance for its own
    # captures) and to 0.1 % for orders up to 25, where the same noise is below 2e-4 of reading.
    i1 = 10.0
    spec = six_pulse_spectrum(i1, 49)
    x = fourier_series(fs, f0, spec, 1.0, dc=0.05, noise_rms=0.02, seed=3)
    res = analyze(Capture.from_arrays(fs, currents={"i": x}), nominal_hz=nominal)
    ch = res.channels[0]
    for h, (a, _) in spec.items():
        assert ch.harmonic_rms[h] == pytest.approx(a, rel=1e-3 if h <= 25 else 1e-2), f"order {h}"
    assert res.fundamental_hz == pytest.approx(f0, abs=0.01)


def test_drifting_frequency_is_followed():
    # 49.8 Hz rising at 0.2 Hz/s over 2 s (a slow grid swing). Each window must span 10 cycles
    # of the instantaneous frequency: its mean frequency (10 cycles over its duration) is
    # compared with the true average over the window, within 0.01 Hz (issue 2). Fundamental and
    # fifth within 0.1 %; the 5th sweeps 0.2 Hz within a window (0.04 of a 5 Hz line), a
    # scalloping loss of (pi 0.02)^2 / 6 = 7e-4 at worst.
    fs, f_start, rate, dur = 10_000.0, 49.8, 0.2, 2.0
    t = np.arange(int(fs * dur)) / fs
    phase = 2 * np.pi * (f_start * t + 0.5 * rate * t**2)
    x = np.sqrt(2) * (10.0 * np.cos(phase) + 2.0 * np.cos(5 * phase + 0.5))
    res = analyze(Capture.from_arrays(fs, currents={"i": x}), nominal_hz=50)
    w = res.windows
    assert w.n_windows >= 8
    t_mid = w.t_start_s + w.duration_s / 2
    true_mean = f_start + rate * t_mid  # linear sweep: average over a window = value at mid
    np.testing.assert_allclose(w.freq_hz, true_mean, atol=0.01)
    ch = res.channels[0]
    assert ch.harmonic_rms[1] == pytest.approx(10.0, rel=1e-3)
    assert ch.harmonic_rms[5] == pytest.approx(2.0, rel=1e-3)


def test_interharmonic_near_fundamental_on_reference_channel():
    # The tracker smooths the cycle count with a local quadratic fit over 11 cycles, so an
    # interharmonic beating against the fundamental does not make the windows jitter.
    # A current-only capture (the current is the frequency reference) of an ideal six-pulse
    # current plus a 75 Hz interharmonic of 3 % of the fundamental. The fundamental does not
    # move, so every window should still span exactly 10 cycles of 50 Hz and the harmonics read
    # within 1 % (issue 2's tolerance for its own captures).
    fs, f0 = 10_000.0, 50.0
    spec = six_pulse_spectrum(10.0, 49)
    x = fourier_series(fs, f0, spec, 1.0)
    t = np.arange(x.size) / fs
    x += np.sqrt(2) * 0.3 * np.cos(2 * np.pi * 75.0 * t + 0.4)
    res = analyze(Capture.from_arrays(fs, currents={"i": x}), nominal_hz=50)
    np.testing.assert_allclose(res.windows.freq_hz, f0, atol=0.003)  # IEC +-0.03 % (from memory)
    ch = res.channels[0]
    for h, (a, _) in spec.items():
        assert ch.harmonic_rms[h] == pytest.approx(a, rel=1e-2), f"order {h}"
