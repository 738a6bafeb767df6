"""One per-window THD: the report's THD-over-time figure (and its per-window CSV) draws the
values the THD check compares, summed over the same orders of the same IEC 61000-4-7
quantity, even when the analysis goes further than the limit table.

The voltage is built from its definition: 230 V rms at 50 Hz with a 2 % fifth and a 3 % 55th
harmonic, so over orders 2 to 50 its THD is 2 % and over orders 2 to 60 it is
sqrt(2^2 + 3^2) = 3.606 % (THD = sqrt(sum_h V_h^2) / V_1, IEC 61000-4-7 / IEEE 519 definition).
"""

from __future__ import annotations

import importlib
import math

import numpy as np
import pytest
from conftest import write_without_observation

import pqcheck
from pqcheck.limits import resolve
from pqcheck.report import figures
from pqcheck.report.job import CaptureRun

assess_mod = importlib.import_module("pqcheck.assess")  # the module (the package exports
# the function of the same name)

FS = 10_000.0  # sample rate [Hz]: order 60 (3 kHz) is resolved
F0 = 50.0  # fundamental [Hz]
DURATION_S = 3.0  # 15 windows of 10 cycles: enough for the report's trend figure


def _capture(path):
    t = np.arange(int(FS * DURATION_S)) / FS
    cols = {"time": t}
    for k, ph in enumerate("abc"):
        s = 2 * np.pi * k / 3
        cols[f"v{ph}"] = sum(math.sqrt(2) * r * np.cos(h * (2 * np.pi * F0 * t - s))
                             for h, r in {1: 230.0, 5: 4.6, 55: 6.9}.items())
    for k, ph in enumerate("abc"):
        s = 2 * np.pi * k / 3
        cols[f"i{ph}"] = sum(math.sqrt(2) * r * np.cos(h * (2 * np.pi * F0 * t - s))
                             for h, r in {1: 100.0, 5: 3.0}.items())
    np.savetxt(path, np.column_stack(list(cols.values())), delimiter=",",
               header=",".join(cols), comments="", fmt="%.6f")
    return path


@pytest.fixture(scope="module")
def analysed(tmp_path_factory):
    d = tmp_path_factory.mktemp("thd")
    cap = pqcheck.load_capture(_capture(d / "c.csv"))
    result = pqcheck.analyze(cap, il_a=100.0, max_order=60)  # beyond the table's order 50
    table = write_without_observation(d, "ieee519-2022")
    limits = resolve(str(table), voltage_level_v=400, isc_a=3500, il_a=100)
    return cap, result, limits


def test_the_figure_draws_the_thd_the_check_compares(analysed, monkeypatch):
    cap, result, limits = analysed
    used = {}
    real = assess_mod.window_thd_percent

    def spy(res, **kw):
        out = real(res, **kw)
        used[kw.get("channel")] = (kw, out)
        return out

    monkeypatch.setattr(assess_mod, "window_thd_percent", spy)
    a = assess_mod.assess(result, limits)
    monkeypatch.setattr(assess_mod, "window_thd_percent", real)
    thd_checks = [c for c in a.checks if c.quantity == "THD"]
    assert thd_checks and used
    names = [c.name for c in result.channels]
    assert {names[k] for k in used} == {c.channel for c in thd_checks}

    run = CaptureRun("c", cap, result, (a,))
    data = figures.trend_data(result, windows=run.windows_frame())
    drawn = {label.split("(")[1].rstrip(")"): y for label, y in data.voltages}
    for k, (kw, per_window) in used.items():
        assert kw["measure"] == "subgroup" and kw["max_order"] == 50  # IEEE 519: 2 to 50
        np.testing.assert_array_equal(drawn[names[k]], per_window)
        # closed form above: 2 % over orders 2 to 50 (the 55th is not summed); the tolerance
        # covers the resampling of the tracked windows
        ok = np.isfinite(per_window)
        assert ok.sum() >= 10
        np.testing.assert_allclose(per_window[ok], 2.0, rtol=1e-3)

    # the analysis's own THD sums orders 2 to 60: 3.606 %, which the report does not draw
    own = figures.trend_data(result)
    for _label, y in own.voltages:
        ok = np.isfinite(y)
        np.testing.assert_allclose(y[ok], math.hypot(2.0, 3.0), rtol=1e-3)
    # the per-window CSV of the report carries the figure's values
    frame = run.windows_frame()
    for name, y in drawn.items():
        np.testing.assert_array_equal(frame[f"{name}_thd_percent"].to_numpy(), y)


def test_the_caption_names_the_orders_summed(analysed):
    from pqcheck.report.pdf import _thd_basis_text

    cap, result, limits = analysed
    a = assess_mod.assess(result, limits)
    assert _thd_basis_text(CaptureRun("c", cap, result, (a,))) == (
        "harmonic subgroups, orders 2 to 50, as ieee519-2022 sums it")
    assert _thd_basis_text(CaptureRun("c", cap, result, ())) == (
        "harmonic components, orders 2 to 60")


def test_orders_never_exceed_what_the_analysis_resolved(analysed):
    _, result, _ = analysed
    assert assess_mod.thd_top_order(result) == result.max_resolved_order == 60
    assert assess_mod.thd_top_order(result, 50) == 50
    assert assess_mod.thd_top_order(result, 80) == 60
