"""Comparison calibration: a unit's sensitivity against frequency from a reference sensor.

The back-to-back comparison method (ISO 16063-21:2003 for vibration transducers; the
comparison methods for hydrophones, IEC 60565, and for microphones, IEC 61094-5, work
the same way in pressure): a calibrated reference sensor and the unit under test see
the same excitation; with both channels in volts at the sensors, the H1 estimate of the
unit's voltage over the reference's gives::

    S_unit(f) = S_ref(f) · H(f),    H = G_ref,unit / G_ref,ref

where ``S_ref(f)`` is the reference's sensitivity with its chart applied. Each
frequency carries an expanded uncertainty (k from Student's t, about 95 %) from a GUM
budget: the reference's own uncertainty (its chart's ``expanded_uncertainty_db`` column,
or a stated value), the random error of H1 from its coherence and the number of
independent averages (Bendat & Piersol), and the resolution of the written chart.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from piezo.chain.curve import ResponseCurve
from piezo.chain.quantity import Quantity, Sensitivity
from piezo.errors import InputError
from piezo.response.measure import TransferEstimate
from piezo.response.uncertainty import (
    DB_PER_NEPER_AMPLITUDE,
    Budget,
    Component,
    h1_random_error,
    independent_averages,
)

__all__ = ["ComparisonResult", "compare_back_to_back"]

#: Resolution of a written chart, dB (values are written to 0.001 dB).
CHART_RESOLUTION_DB = 0.001


@dataclass(frozen=True)
class ComparisonResult:
    """The unit's sensitivity against frequency, with its uncertainty.

    Attributes
    ----------
    frequency_hz
        Frequencies, Hz.
    sensitivity
        Complex sensitivity of the unit, V per SI unit of ``quantity``.
    coherence
        γ² of the two channels.
    expanded_uncertainty_db
        Expanded uncertainty of ``20 lg|S|`` at each frequency, dB.
    coverage_factor
        k at each frequency (Student's t for the effective degrees of freedom).
    reference_frequency_hz
        Frequency of the unit's stated sensitivity (the chart is relative to it).
    quantity
        What both sensors measure.
    independent_averages
        Equivalent number of independent Welch averages behind H1.
    reference_budget
        The full budget at the reference frequency.

    Examples
    --------
    A unit with three times the reference's output, one sample late: its phase against
    the reference frequency (the bin nearest 1 kHz, 984.4 Hz) is
    ``-360°·(f − 984.4 Hz)/fs``, -37.6° at 6 kHz:

    >>> from piezo.chain.quantity import parse_sensitivity_of
    >>> from piezo.response.measure import response_h1
    >>> x = np.random.default_rng(1).standard_normal(48000)
    >>> est = response_h1(x, 3 * np.roll(x, 1), 48000.0, segment_frames=1024)
    >>> ref = parse_sensitivity_of("1 mV/(m/s²)")
    >>> r = compare_back_to_back(est, reference=ref, reference_expanded_db=0.1)
    >>> round(r.sensitivity_at_reference * 1e3, 3), r.quantity.name
    (3.0, 'acceleration')
    >>> k = int(np.argmin(np.abs(r.frequency_hz - 6000.0)))
    >>> round(float(r.phase_deg[k]), 1), abs(round(float(r.relative_db[k]), 2))
    (-37.6, 0.0)
    >>> print(r.chart_text(low_hz=1000.0, high_hz=1100.0).splitlines()[1])
    frequency_hz,relative_db,phase_deg,expanded_uncertainty_db
    """

    frequency_hz: np.ndarray
    sensitivity: np.ndarray
    coherence: np.ndarray
    expanded_uncertainty_db: np.ndarray
    coverage_factor: np.ndarray
    reference_frequency_hz: float
    quantity: Quantity
    independent_averages: float
    reference_budget: Budget

    @property
    def _reference_index(self) -> int:
        return int(np.argmin(np.abs(self.frequency_hz - self.reference_frequency_hz)))

    @property
    def sensitivity_at_reference(self) -> float:
        """``|S_unit|`` at the reference frequency, V per SI unit."""
        return float(abs(self.sensitivity[self._reference_index]))

    @property
    def relative_db(self) -> np.ndarray:
        """``20 lg(|S(f)| / |S(f_ref)|)``: the chart's relative_db column."""
        return 20.0 * np.log10(np.abs(self.sensitivity) / self.sensitivity_at_reference)

    @property
    def phase_deg(self) -> np.ndarray:
        """Phase of the unit relative to its phase at the reference frequency, degrees."""
        phase = np.unwrap(np.angle(self.sensitivity))
        return np.degrees(phase - phase[self._reference_index])

    def chart_text(self, *, low_hz: float, high_hz: float, min_coherence: float = 0.99) -> str:
        """The result as a response-curve CSV (the format :mod:`piezo.chain.curve` reads).

        Frequencies outside ``[low_hz, high_hz]`` or with coherence below
        ``min_coherence`` are left out.
        """
        keep = (
            (self.frequency_hz >= low_hz)
            & (self.frequency_hz <= high_hz)
            & (self.coherence >= min_coherence)
        )
        if np.count_nonzero(keep) < 2:
            raise InputError(
                f"fewer than two frequencies between {low_hz:g} and {high_hz:g} Hz reach "
                f"coherence {min_coherence:g}: no chart to write"
            )
        lines = [
            f"# comparison calibration; relative to {self.reference_frequency_hz:g} Hz;"
            " expanded uncertainty k from Student's t, about 95 %",
            "frequency_hz,relative_db,phase_deg,expanded_uncertainty_db",
        ]
        for f, r, p, u in zip(
            self.frequency_hz[keep],
            self.relative_db[keep],
            self.phase_deg[keep],
            self.expanded_uncertainty_db[keep],
            strict=True,
        ):
            lines.append(f"{f:.6g},{r:.3f},{p:.2f},{u:.3f}")
        return "\n".join(lines) + "\n"


def compare_back_to_back(
    estimate: TransferEstimate,
    *,
    reference: Sensitivity,
    reference_curve: ResponseCurve | None = None,
    reference_expanded_db: float | None = None,
    reference_frequency_hz: float = 1000.0,
    measured: int = 0,
    window: np.ndarray | None = None,
) -> ComparisonResult:
    """The unit's sensitivity from an H1 estimate of unit volts over reference volts.

    Parameters
    ----------
    estimate
        H1 of the unit's channel (volts at the sensor) over the reference's (volts).
    reference
        The reference sensor's stated (voltage) sensitivity.
    reference_curve
        The reference's chart; its ``expanded_uncertainty_db`` column, if present, is
        the reference's uncertainty.
    reference_expanded_db
        The reference's expanded uncertainty (k = 2) in dB when its chart has none.
    reference_frequency_hz
        Frequency at which the unit's sensitivity is stated.
    measured
        Index of the unit among the estimate's measured channels.
    window
        The analysis window of the estimate (for the count of independent averages);
        default a periodic Hann window of the estimate's segment length.

    Examples
    --------
    A unit with exactly three times the reference's output (ideal, coherent data):

    >>> from piezo.chain.quantity import parse_sensitivity_of
    >>> from piezo.response.measure import response_h1
    >>> x = np.random.default_rng(1).standard_normal(48000 * 4)
    >>> est = response_h1(x, 3 * x, 48000.0)
    >>> ref = parse_sensitivity_of("1 mV/(m/s²)")
    >>> r = compare_back_to_back(est, reference=ref, reference_expanded_db=0.1)
    >>> round(r.sensitivity_at_reference * 1e3, 6)        # mV/(m/s²)
    3.0
    >>> round(float(r.expanded_uncertainty_db[100]), 3)   # the reference's 0.1 dB
    0.1
    """
    if reference.electrical != "V":
        raise InputError("the reference sensitivity must be a voltage sensitivity (V per unit)")
    if not 0 <= measured < estimate.response.shape[1]:
        raise InputError(f"measured channel index {measured!r} is not in the estimate")
    f = np.asarray(estimate.frequency_hz, dtype=float)
    h = estimate.response[:, measured]
    g2 = estimate.coherence[:, measured]
    if reference_curve is not None:
        s_ref = reference.value * reference_curve.relative_response(np.maximum(f, f[1]))
    else:
        s_ref = np.full(f.shape, reference.value, dtype=complex)
    if reference_curve is not None and reference_curve.expanded_uncertainty_db is not None:
        u_ref = (
            np.interp(
                np.log10(np.maximum(f, f[1])),
                np.log10(reference_curve.frequency_hz),
                reference_curve.expanded_uncertainty_db,
            )
            / 2.0
        )
    elif reference_expanded_db is not None:
        u_ref = np.full(f.shape, reference_expanded_db / 2.0)
    else:
        raise InputError(
            "the reference's uncertainty is needed: a chart with expanded_uncertainty_db, "
            "or a stated expanded uncertainty in dB"
        )
    if window is None:
        from scipy.signal import get_window

        window = get_window("hann", estimate.segment_frames)
    step = max(1, estimate.segment_frames // 2)
    n_d = independent_averages(estimate.segments, window, step)
    u_random = DB_PER_NEPER_AMPLITUDE * h1_random_error(g2, n_d)
    nu = max(n_d - 1.0, 1.0)
    budgets = [
        Budget(
            (
                Component("reference sensitivity", float(ur)),
                Component(
                    "random error of H1",
                    float(min(urand, 1e6)),
                    degrees_of_freedom=nu,
                    distribution="t",
                ),
                Component.rectangular("chart resolution", CHART_RESOLUTION_DB / 2),
            )
        )
        for ur, urand in zip(u_ref, u_random, strict=True)
    ]
    k = np.array([b.coverage_factor for b in budgets])
    expanded = np.array([b.expanded_uncertainty for b in budgets])
    index = int(np.argmin(np.abs(f - reference_frequency_hz)))
    if not math.isclose(f[index], reference_frequency_hz, rel_tol=0.05):
        raise InputError(
            f"reference frequency {reference_frequency_hz:g} Hz is outside the estimate's "
            f"range ({f[1]:g} … {f[-1]:g} Hz)"
        )
    return ComparisonResult(
        frequency_hz=f,
        sensitivity=s_ref * h,
        coherence=np.asarray(g2, dtype=float),
        expanded_uncertainty_db=expanded,
        coverage_factor=k,
        reference_frequency_hz=float(reference_frequency_hz),
        quantity=reference.quantity,
        independent_averages=n_d,
        reference_budget=budgets[index],
    )
