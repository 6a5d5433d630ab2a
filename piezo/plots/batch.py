"""Figures of the batch pages: a histogram per metric with its limits, and a capture's
measured response with the spec's golden response and masks.

Drawn in the project style (:mod:`piezo.plots.style`); matplotlib loads only when a
figure is drawn. Each function returns PNG bytes (embedded in the pages), or None when
there is nothing to draw.
"""

from __future__ import annotations

import itertools
import math
from collections.abc import Mapping, Sequence
from typing import TYPE_CHECKING, Any

import numpy as np

from piezo.plots.style import (
    TRACES,
    axis_label,
    figure,
    legend_below,
    limit_line,
    plot_style,
    png_bytes,
    trace,
)

if TYPE_CHECKING:
    from piezo.batch.spec import MetricSpec, Spec

__all__ = ["histogram_figure", "response_figure"]

_SEVERITIES = ("fail", "warn")


def _limit_values(metric: MetricSpec) -> list[tuple[float, str]]:
    """Every lower and upper limit of ``metric`` with its severity, each value once per
    severity, sorted."""
    found = {
        (float(v), lim.severity)
        for lim in metric.limits
        for v in (lim.lower, lim.upper)
        if v is not None
    }
    return sorted(found)


def histogram_figure(summary: Mapping[str, Any], metric: MetricSpec) -> bytes | None:
    """Histogram of one metric over the lot with every limit drawn: fail limits solid,
    warn limits dashed (:data:`~piezo.plots.style.LIMIT_STYLES`).

    ``summary`` is the metric's entry of the batch summary (its ``histogram`` edges and
    counts, values outside the range counted in ``below``/``above``). Returns None when
    no capture has a value.

    Examples
    --------
    >>> from piezo.batch.outputs import summarize
    >>> from piezo.batch.spec import load_spec
    >>> from piezo.plots.style import capture_figures
    >>> spec = load_spec("recordings/pd27-spec.toml")
    >>> rows = [{"verdict": "pass", "metrics": {"sensitivity": v}} for v in (-42.0, -41.5, -41.0)]
    >>> summary = summarize(rows, spec)["metrics"][0]
    >>> with capture_figures() as figs:
    ...     _ = histogram_figure(summary, spec.metrics[0])
    >>> figs[0].axes[0].get_title(loc="left")
    '3 captures'
    """
    hist = summary["histogram"]
    edges, counts = list(hist["edges"]), list(hist["counts"])
    if not counts:
        return None
    from matplotlib.ticker import MaxNLocator

    limits = _limit_values(metric)
    with plot_style():
        fig, ax = figure(6.6, 3.0, legend_rows=1)
        widths = [b - a for a, b in itertools.pairwise(edges)]
        ax.bar(
            edges[:-1],
            counts,
            width=widths,
            align="edge",
            color=TRACES[0].color,
            edgecolor="white",
            linewidth=0.6,
            label="captures per bin",
            zorder=2,
        )
        labelled: set[str] = set()
        for value, severity in limits:
            label = None if severity in labelled else f"{severity} limit"
            labelled.add(severity)
            ax.axvline(value, **limit_line(severity), label=label, zorder=3)
        points = [edges[0], edges[-1], *(v for v, _ in limits)]
        lo, hi = min(points), max(points)
        pad = 0.04 * (hi - lo) if hi > lo else 1.0
        ax.set_xlim(lo - pad, hi + pad)
        ax.set_ylim(0, max(counts) * 1.15 + 0.5)
        ax.yaxis.set_major_locator(MaxNLocator(integer=True))  # whole captures
        ax.grid(axis="x", visible=False)
        ax.set_xlabel(axis_label(summary["name"], summary["unit"]))
        ax.set_ylabel(axis_label("number of captures"))
        below, above = int(hist.get("below") or 0), int(hist.get("above") or 0)
        outside = [f"{n} {side}" for n, side in ((below, "below"), (above, "above")) if n]
        title = f"{sum(counts) + below + above} captures"
        if outside:
            title += f"; {' and '.join(outside)} the range shown"
        ax.set_title(title)
        legend_below(fig, 1 + len(labelled))
        return png_bytes(fig)


def _at(frequency_hz: Sequence[float], magnitude_db: Sequence[float], f: float) -> float:
    """Magnitude at ``f``, linear in log frequency (for placing curves on the plot)."""
    return float(np.interp(math.log(f), np.log(frequency_hz), magnitude_db))


def _severity(metric: MetricSpec) -> str:
    """The severity a mask's violation has (its limit's; "fail" when several)."""
    severities = {lim.severity for lim in metric.limits}
    return "fail" if "fail" in severities or not severities else "warn"


def response_figure(response: Mapping[str, Any] | None, spec: Spec) -> bytes | None:
    """The measured response with the spec's golden response(s) and masks, as PNG.

    Curves given relative to a frequency (``relative_to_hz``) are shifted to meet the
    measured curve there. Mask lines take the style of their limit's severity. Returns
    None without a response.

    Examples
    --------
    >>> from piezo.batch.spec import load_spec
    >>> from piezo.plots.style import capture_figures
    >>> spec = load_spec("recordings/pd27-spec.toml")
    >>> f = [100.0, 1000.0, 5000.0]
    >>> with capture_figures() as figs:
    ...     _ = response_figure({"frequency_hz": f, "magnitude_db": [-42.0] * 3}, spec)
    >>> labels = [t.get_text() for t in figs[0].legends[0].get_texts()]
    >>> labels[:2]
    ['measured', 'golden response']
    >>> response_figure(None, spec) is None
    True
    """
    if not response:
        return None
    f, mag = response["frequency_hz"], response["magnitude_db"]
    goldens = [m for m in spec.metrics if m.kind == "golden_deviation"]
    masks = [m for m in spec.metrics if m.kind == "response_mask"]
    rows = math.ceil((1 + len(goldens) + 2 * len(masks)) / 3)
    with plot_style():
        fig, ax = figure(6.6, 3.4 + 0.2 * rows, legend_rows=rows)
        ax.semilogx(f, mag, **{**trace(0), "linewidth": 1.6}, label="measured")
        for m in goldens + masks:
            ref = m.params.get("relative_to_hz")
            offset = _at(f, mag, ref) if ref is not None and f[0] <= ref <= f[-1] else 0.0
            if m.kind == "golden_deviation":
                g = m.params["golden_data"]
                gf, gm = g["frequency_hz"], g["magnitude_db"]
                if ref is not None and gf[0] <= ref <= gf[-1]:
                    gm = [v - _at(gf, g["magnitude_db"], ref) + offset for v in gm]
                # One golden curve is "the golden response"; several are told apart by
                # the metric that uses each.
                label = "golden response" if len(goldens) == 1 else f"golden response: {m.name}"
                ax.semilogx(gf, gm, **trace(1), label=label)
                continue
            severity = _severity(m)
            for key, side in (("lower_db", "lower"), ("upper_db", "upper")):
                if m.params.get(key) is not None:
                    ax.semilogx(
                        m.params["frequency_hz"],
                        [v + offset for v in m.params[key]],
                        **limit_line(severity),
                        marker="_",
                        markersize=8,
                        label=f"{m.name}: {side} limit ({severity})",
                    )
        ax.set_xlabel(axis_label("frequency", "Hz"))
        ax.set_ylabel(axis_label("magnitude", response.get("unit") or "dB"))
        ax.set_title("Measured response")
        legend_below(fig, 3)
        return png_bytes(fig)
