"""Report figures as a reader sees them: pixels of a rendered spectrum chart.

The values below are chosen to sit close to their limits (the hardest case for a limit mark
drawn over a bar); they are not measurements and need no source.
"""

import numpy as np
import pytest
from matplotlib.backends.backend_agg import FigureCanvasAgg

from pqcheck.report import figures


def _render(panels):
    data = figures.SpectrumData(title="t", unit="% of IL", panels=tuple(panels))
    fig = figures.plot_spectrum(data)
    fig.set_dpi(200)  # the report's figure resolution
    canvas = FigureCanvasAgg(fig)
    canvas.draw()
    rgba = np.asarray(canvas.buffer_rgba())
    return fig, rgba


def _pixel(fig, ax, rgba, x, y):
    """RGB of the pixel at data point (x, y) of ``ax`` (row 0 at the top of the image)."""
    px, py = ax.transData.transform((x, y))
    h = rgba.shape[0]
    return rgba[int(round(h - py)), int(round(px)), :3].astype(int)


@pytest.mark.parametrize("measured, limit, verdict", [
    (0.668, 0.6, "fail"),      # above its limit: the case that looked "below" before
    (0.606, 0.6, "fail"),      # 1 % above its limit
    (0.595, 0.6, "pass"),      # just below its limit
    (0.600, 0.6, "pass"),      # exactly at its limit
])
def test_bar_top_stays_visible_at_its_limit(measured, limit, verdict):
    panel = figures.SpectrumPanel(label="phase a", orders=np.array([23, 25]),
                                  measured=np.array([measured, 0.1]),
                                  limit=np.array([limit, limit]),
                                  verdicts=(verdict, "pass"))
    fig, rgba = _render([panel])
    ax = fig.axes[0]
    ymax = ax.get_ylim()[1]
    # Just below the bar's top (0.5 % of the axis), in the bar's middle: the bar's own fill,
    # never the white of the page (the former halo around the limit mark whitened this).
    rgb = _pixel(fig, ax, rgba, 23, measured - 0.005 * ymax)
    assert (rgb < 235).any(), f"bar top hidden (pixel {rgb})"
    # Beside the bar, at the limit: the limit mark is drawn there (wider than the bar).
    side = _pixel(fig, ax, rgba, 23 + 0.40, limit)
    assert (side < 200).any(), f"limit mark not visible beside the bar (pixel {side})"


def test_undecided_orders_carry_the_reports_glyph_and_the_legend_clears_the_titles():
    from pqcheck.report.style import VERDICT_MARK

    panels = [figures.SpectrumPanel(label=f"phase {p}", orders=np.array([5, 7, 11]),
                                    measured=np.array([8.0, 3.0, 1.0]),
                                    limit=np.array([7.0, 7.0, 3.5]),
                                    verdicts=("fail", "inconclusive", "pass"))
              for p in "abc"]
    fig, _ = _render(panels)
    renderer = fig.canvas.get_renderer()
    marks = [t.get_text() for ax in fig.axes for t in ax.texts]
    # the chart marks an undecided order as the tables do (never a "?", which reads as a
    # missing glyph), a failing one with the cross
    assert f"{VERDICT_MARK['inconclusive']}7" in marks and "\u27155" in marks
    assert not any("?" in m for m in marks)
    (legend,) = fig.legends
    box = legend.get_window_extent(renderer)
    for ax in fig.axes:
        assert not box.overlaps(ax.title.get_window_extent(renderer)), ax.title.get_text()
        assert not box.overlaps(ax.get_window_extent(renderer))
