"""Shared synthetic-signal helpers for the test suite.

Every signal here is built from its definition (a Fourier series with rms phasors, or a sampled
piecewise function), never from pqcheck code, so tests compare pqcheck against something it did
not compute itself.

Conventions: a harmonic is given as ``{order: (rms, phase_deg)}`` in the cosine basis,
``x(t) = dc + sum_h sqrt(2) rms_h cos(2 pi h f0 t + phase_h + h phi0)``; ``phi0`` rotates the
whole waveform in time, so phases relative to the fundamental do not depend on it.
"""

from __future__ import annotations

import hashlib
import os
import tempfile
from pathlib import Path

import numpy as np
import pytest

from pqcheck import Capture


def fourier_series(
    fs_hz: float,
    f0_hz: float,
    harmonics: dict,
    duration_s: float,
    *,
    dc: float = 0.0,
    phi0_rad: float = 0.0,
    noise_rms: float = 0.0,
    seed: int = 0,
) -> np.ndarray:
    """Samples of a Fourier series.

    Parameters
    ----------
    fs_hz : float
        Sample rate. [Hz]
    f0_hz : float
        Fundamental frequency. [Hz]
    harmonics : dict of int to (float, float)
        Order to (rms, phase in the cosine basis). [A] or [V], [deg]
    duration_s : float
        Record length; ``round(duration_s * fs_hz)`` samples. [s]
    dc : float
        Constant added. [A] or [V]
    phi0_rad : float
        Time shift of the whole waveform, as a fundamental phase. [rad]
    noise_rms : float
        Rms of added white Gaussian noise (seeded). [A] or [V]
    seed : int
        Seed of the noise generator.

    Returns
    -------
    numpy.ndarray
        float64 samples.
    """
    n = int(round(duration_s * fs_hz))
    t = np.arange(n) / fs_hz
    x = np.full(n, float(dc))
    for h, (rms, ph) in harmonics.items():
        x += np.sqrt(2.0) * rms * np.cos(2 * np.pi * h * f0_hz * t + np.radians(ph) + h * phi0_rad)
    if noise_rms:
        x += np.random.default_rng(seed).normal(0.0, noise_rms, n)
    return x


def fourier_capture(
    fs_hz: float,
    f0_hz: float,
    harmonics: dict,
    duration_s: float = 1.0,
    *,
    quantity: str = "current",
    name: str = "i",
    **kwargs,
) -> Capture:
    """A one-channel :class:`~pqcheck.Capture` of a Fourier series (see :func:`fourier_series`)."""
    x = fourier_series(fs_hz, f0_hz, harmonics, duration_s, **kwargs)
    group = {name: x}
    if quantity == "current":
        return Capture.from_arrays(fs_hz, currents=group)
    return Capture.from_arrays(fs_hz, voltages=group)


# ---- closed-form spectra (standards-facts.md section 10; Fourier series derived in comments) ---


def six_pulse_spectrum(i1_rms: float, max_order: int) -> dict:
    """Ideal six-pulse line current (120-degree quasi-square wave centred on theta = 0).

    Cosine series of a pulse of height Id for |theta| < 60 deg and -Id around 180 deg:
    ``a_h = 4 Id / (pi h) sin(h pi / 3)`` for odd h, zero for even h and triplens, so
    ``I_h = I_1 / h`` for h = 6k +- 1, in phase with the fundamental for 6k + 1 and in
    antiphase for 6k - 1.
    """
    out = {}
    for h in range(1, max_order + 1):
        if h % 2 and h % 3:
            out[h] = (i1_rms / h, 0.0 if h % 6 == 1 else 180.0)
    return out


def square_spectrum(i1_rms: float, max_order: int) -> dict:
    """Square wave +-A centred on theta = 0: ``a_h = 4A/(pi h) sin(h pi/2)``, odd h."""
    return {h: (i1_rms / h, 0.0 if h % 4 == 1 else 180.0) for h in range(1, max_order + 1, 2)}


def triangle_spectrum(i1_rms: float, max_order: int) -> dict:
    """Triangle wave with its peak at theta = 0: ``a_h = 8A/(pi^2 h^2)``, odd h, all in phase."""
    return {h: (i1_rms / h**2, 0.0) for h in range(1, max_order + 1, 2)}


def six_pulse_wave(theta) -> np.ndarray:
    """Sampled ideal six-pulse current of unit height at fundamental phase ``theta``. [rad]"""
    th = np.mod(np.asarray(theta, dtype=np.float64) + np.pi, 2 * np.pi) - np.pi  # (-pi, pi]
    a = np.abs(th)
    return np.where(a < np.pi / 3, 1.0, np.where(a > 2 * np.pi / 3, -1.0, 0.0))


def square_wave(theta) -> np.ndarray:
    """Sampled square wave +-1 centred on ``theta`` = 0. [rad]"""
    th = np.mod(np.asarray(theta, dtype=np.float64) + np.pi, 2 * np.pi) - np.pi
    return np.where(np.abs(th) < np.pi / 2, 1.0, -1.0)


def thd_of(spectrum: dict, max_order: int = 50) -> float:
    """THD of a ``{order: (rms, phase)}`` spectrum up to ``max_order``, by the IEEE 519
    definition (orders 2..max over the fundamental). [%]"""
    num = sum(r**2 for h, (r, _) in spectrum.items() if 2 <= h <= max_order)
    return 100.0 * np.sqrt(num) / spectrum[1][0]


# ---- three-phase helpers ----


def phasor_series(fs_hz, f0_hz, phasors: dict, duration_s, phase_shift_deg=0.0):
    """Fourier series from ``{order: complex rms phasor}``; ``phase_shift_deg`` is the phase's
    fundamental displacement, applied as ``h * shift`` to order h (a balanced set)."""
    harm = {
        h: (abs(c), np.degrees(np.angle(c)) + h * phase_shift_deg) for h, c in phasors.items()
    }
    return fourier_series(fs_hz, f0_hz, harm, duration_s)


@pytest.fixture
def rng():
    """Seeded random generator (tests are reproducible)."""
    return np.random.default_rng(20240601)


# ---- limit tables for short synthetic captures ----


def without_observation(table_id: str):
    """The bundled table ``table_id`` with its minimum observation period removed.

    Synthetic captures last seconds; the standards observe minutes (IEC 61000-3-2) or a week
    (IEEE 519), so a short capture is inconclusive by design. Tests of the limit arithmetic
    use this edited table, which pqcheck reports as a modified copy of the bundled one.
    """
    from dataclasses import replace

    from pqcheck.limits import Observation, load_table

    return replace(load_table(table_id), observation=Observation())


def write_without_observation(folder, table_id: str):
    """Write :func:`without_observation` as a table file in ``folder``; return its path."""
    from pqcheck.limits import dump_toml

    path = folder / f"{table_id}-no-observation.toml"
    path.write_text(dump_toml(without_observation(table_id)), encoding="utf-8")
    return path


def filled_plan(text: str) -> str:
    """A test-plan text with the fields a plan needs before it can pass: the equipment's
    name, the date and one declared instrument (an incomplete plan is inconclusive), appended
    so that the line numbers of the original text stay."""
    if "[equipment]" not in text:
        text += '\n[equipment]\nname = "Unit under test"\n'
    if "[conditions]" not in text:
        text += ('\n[conditions]\ndate = "2026-01-15"\n'
                 '[[conditions.instruments]]\nrole = "digitiser"\nmodel = "bench digitiser"\n'
                 'accuracy = "0.5 %"\n')
    return text


# --- hermetic runs ------------------------------------------------------------------------


_PRIVATE: dict = {}


def pytest_sessionstart(session):
    """Give this run a system temporary folder of its own (inside pytest's folder, so runs
    on a shared machine do not see each other's files) and keep matplotlib's cache and Dask's
    scratch space out of the user's folders."""
    factory = session.config._tmp_path_factory
    _PRIVATE["tmp"] = factory.mktemp("system-tmp", numbered=False)
    _PRIVATE["old"] = {k: os.environ.get(k) for k in ("TMPDIR", "MPLCONFIGDIR",
                                                      "DASK_TEMPORARY_DIRECTORY")}
    os.environ["TMPDIR"] = tempfile.tempdir = str(_PRIVATE["tmp"])
    os.environ["MPLCONFIGDIR"] = str(factory.mktemp("matplotlib", numbered=False))
    os.environ["DASK_TEMPORARY_DIRECTORY"] = str(factory.mktemp("dask", numbered=False))


def _pqcheck_leftovers() -> set:
    """What the tests could leave outside pytest's folders: anything in the run's system
    temporary folder, and files in the user's cache folders."""
    out = set()
    tmp = _PRIVATE.get("tmp")
    if tmp is not None and tmp.is_dir():
        # multiprocessing's pymp-* folders are removed when the interpreter exits (by child
        # processes, maybe while this runs): never descend into them, and a file that
        # vanishes during the walk is not a leftover
        for top in list(tmp.iterdir()):
            if top.name.startswith("pymp-"):
                continue
            try:
                out.add(str(top))
                if top.is_dir():
                    out |= {str(p) for p in top.rglob("*")}
            except FileNotFoundError:
                continue
    caches = [Path(os.environ.get("XDG_CACHE_HOME") or Path.home() / ".cache") / "pqcheck",
              Path.home() / ".cache" / "pqcheck"]
    for c in caches:
        if c.is_dir():
            out |= {str(p) for p in c.rglob("*") if p.is_file()}
    return out


def _shared_state() -> dict:
    """Module-level settings and bundled data a test must leave as it found them."""
    from importlib import resources

    from pqcheck.dsp import spectrum
    from pqcheck.readers import stream

    tables = {}
    for f in resources.files("pqcheck.limit_tables").iterdir():
        if f.name.endswith(".toml"):
            tables[f.name] = hashlib.sha256(f.read_bytes()).hexdigest()
    return {"FFT_WORKERS": spectrum.FFT_WORKERS, "PARSE_THREADS": stream.PARSE_THREADS,
            "tables": tables}


@pytest.fixture(autouse=True, scope="session")
def _hermetic_session(tmp_path_factory):
    """Fail the run if the tests leave files outside pytest's temporary folders (the run's
    system temporary folder, the user's cache) or change shared state (bundled tables,
    module-level settings such as ``dsp.spectrum.FFT_WORKERS`` or
    ``readers.stream.PARSE_THREADS``)."""
    before, state = _pqcheck_leftovers(), _shared_state()
    try:
        import dask

        dask.config.set({"temporary-directory": os.environ["DASK_TEMPORARY_DIRECTORY"]})
    except (ImportError, KeyError):
        pass
    yield
    left = sorted(_pqcheck_leftovers() - before)
    assert not left, f"tests left files outside pytest's temporary folders: {left[:5]}"
    assert _shared_state() == state, "a test changed shared state (bundled tables or settings)"


@pytest.fixture(autouse=True)
def _cache_in_tmp(tmp_path_factory, monkeypatch):
    """The cache of every test is a pytest folder, never the user's ``~/.cache``."""
    monkeypatch.setenv("PQCHECK_CACHE_DIR", str(tmp_path_factory.getbasetemp() / "cache"))
