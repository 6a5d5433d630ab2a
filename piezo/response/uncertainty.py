"""Measurement uncertainty: GUM budgets, the random error of H1, decision rules.

A :class:`Budget` combines uncorrelated input components by the law of propagation of
uncertainty of the GUM (JCGM 100:2008, 5.1.2), finds the effective degrees of freedom by
the Welch–Satterthwaite formula (G.4.1) and the coverage factor for about 95 % from
Student's t (G.3.4; for infinitely many degrees of freedom the conventional k = 2,
6.3.3). Type B components are entered from their distribution: a rectangular
half-width ``a`` gives ``u = a/√3`` (4.3.7), a quoted expanded uncertainty ``U`` at
coverage factor ``k`` gives ``u = U/k`` (4.3.6).

The random error of an H1 transfer-function magnitude estimated from ``n_d``
independent averages with coherence ``γ²`` is ``ε = √(1 − γ²) / (|γ| √(2 n_d))``
(Bendat & Piersol, *Random Data*, 4th ed., 2010, Table 9.6). Overlapped Welch segments
are not independent: :func:`independent_averages` counts them by Welch's (1967)
correlation of overlapping windows.

:func:`decide` applies a decision rule to a measured value and its expanded
uncertainty: simple acceptance (the value inside the limits), or guarded acceptance
(accept only inside the limits narrowed by a guard band ``w = U``; JCGM 106:2012, 8.3.2,
and ISO 14253-1:2017).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

from piezo.errors import InputError

__all__ = [
    "DB_PER_NEPER_AMPLITUDE",
    "Budget",
    "Component",
    "Decision",
    "decide",
    "h1_random_error",
    "independent_averages",
]

#: 20·lg(e): a small relative amplitude error ε is 20·lg(e)·ε dB.
DB_PER_NEPER_AMPLITUDE = 20.0 / math.log(10.0)

#: Coverage probability of the expanded uncertainties (JCGM 100:2008, 6.3.3: k = 2 for
#: a normal distribution corresponds to 95.45 %).
COVERAGE_PROBABILITY = 0.9545


@dataclass(frozen=True)
class Component:
    """One input of an uncertainty budget.

    Attributes
    ----------
    name
        What the component is, in words.
    standard_uncertainty
        Standard uncertainty ``u_i`` of the input, in the input's unit.
    sensitivity
        Sensitivity coefficient ``c_i`` (result unit per input unit).
    degrees_of_freedom
        ν_i; infinite for a Type B estimate taken as exact.
    distribution
        ``"normal"``, ``"rectangular"`` or ``"t"``, for the budget table.

    Examples
    --------
    A temperature known to ±0.2 K (u = 0.1 K) acting through a coefficient of
    -0.05 dB/K contributes 0.005 dB:

    >>> c = Component("temperature", 0.1, sensitivity=-0.05, degrees_of_freedom=20)
    >>> round(c.contribution, 6), c.distribution
    (0.005, 'normal')
    """

    name: str
    standard_uncertainty: float
    sensitivity: float = 1.0
    degrees_of_freedom: float = math.inf
    distribution: str = "normal"

    def __post_init__(self) -> None:
        if not (math.isfinite(self.standard_uncertainty) and self.standard_uncertainty >= 0):
            raise InputError(
                f"{self.name}: standard uncertainty must be finite and not negative, "
                f"got {self.standard_uncertainty!r}"
            )
        if not self.degrees_of_freedom > 0:
            raise InputError(
                f"{self.name}: degrees of freedom must be positive, "
                f"got {self.degrees_of_freedom!r}"
            )

    @classmethod
    def rectangular(cls, name: str, half_width: float, *, sensitivity: float = 1.0) -> Component:
        """A component known to lie within ±``half_width``: ``u = a/√3`` (GUM 4.3.7).

        Examples
        --------
        >>> round(Component.rectangular("resolution", 0.005).standard_uncertainty, 6)
        0.002887
        """
        return cls(name, half_width / math.sqrt(3.0), sensitivity, math.inf, "rectangular")

    @classmethod
    def from_expanded(
        cls, name: str, expanded: float, *, k: float = 2.0, sensitivity: float = 1.0
    ) -> Component:
        """A component quoted as an expanded uncertainty ``U`` with factor ``k``: ``U/k``.

        Examples
        --------
        >>> Component.from_expanded("reference chart", 0.1).standard_uncertainty
        0.05
        """
        if not k > 0:
            raise InputError(f"{name}: coverage factor must be positive, got {k!r}")
        return cls(name, expanded / k, sensitivity, math.inf, "normal")

    @property
    def contribution(self) -> float:
        """``|c_i|·u_i``, in the result's unit."""
        return abs(self.sensitivity) * self.standard_uncertainty


@dataclass(frozen=True)
class Budget:
    """An uncertainty budget of uncorrelated components (JCGM 100:2008).

    Examples
    --------
    A budget worked by hand (docs/uncertainty.md): a reference chart quoted at
    U = 0.10 dB (k = 2), a random error of 0.03 dB from 40 degrees of freedom, and a
    display resolution of 0.01 dB (half-width 0.005 dB):

    >>> b = Budget((
    ...     Component.from_expanded("reference chart", 0.10),
    ...     Component("random error of H1", 0.03, degrees_of_freedom=40, distribution="t"),
    ...     Component.rectangular("resolution", 0.005),
    ... ))
    >>> round(b.combined_standard_uncertainty, 4)
    0.0584
    >>> round(b.effective_degrees_of_freedom)
    574
    >>> round(b.coverage_factor, 3), round(b.expanded_uncertainty, 3)
    (2.004, 0.117)
    """

    components: tuple[Component, ...]
    coverage_probability: float = field(default=COVERAGE_PROBABILITY)

    @property
    def combined_standard_uncertainty(self) -> float:
        """``u_c = √(Σ (c_i u_i)²)`` (GUM 5.1.2, uncorrelated inputs)."""
        return math.sqrt(sum(c.contribution**2 for c in self.components))

    @property
    def effective_degrees_of_freedom(self) -> float:
        """ν_eff by the Welch–Satterthwaite formula (GUM G.4.1); inf if all are inf."""
        uc = self.combined_standard_uncertainty
        denominator = sum(
            c.contribution**4 / c.degrees_of_freedom
            for c in self.components
            if math.isfinite(c.degrees_of_freedom)
        )
        if denominator == 0.0 or uc == 0.0:
            return math.inf
        return uc**4 / denominator

    @property
    def coverage_factor(self) -> float:
        """k from Student's t for ν_eff at the coverage probability (GUM G.3.4)."""
        nu = self.effective_degrees_of_freedom
        if math.isinf(nu):
            return 2.0
        from scipy.stats import t

        return float(t.ppf(0.5 + self.coverage_probability / 2.0, nu))

    @property
    def expanded_uncertainty(self) -> float:
        """``U = k·u_c``."""
        return self.coverage_factor * self.combined_standard_uncertainty

    def to_dict(self) -> dict[str, object]:
        """The budget table as plain values (the JSON form)."""
        return {
            "components": [
                {
                    "name": c.name,
                    "distribution": c.distribution,
                    "standard_uncertainty": c.standard_uncertainty,
                    "sensitivity_coefficient": c.sensitivity,
                    "contribution": c.contribution,
                    "degrees_of_freedom": (
                        None if math.isinf(c.degrees_of_freedom) else c.degrees_of_freedom
                    ),
                }
                for c in self.components
            ],
            "combined_standard_uncertainty": self.combined_standard_uncertainty,
            "effective_degrees_of_freedom": (
                None
                if math.isinf(self.effective_degrees_of_freedom)
                else self.effective_degrees_of_freedom
            ),
            "coverage_factor": self.coverage_factor,
            "coverage_probability": self.coverage_probability,
            "expanded_uncertainty": self.expanded_uncertainty,
        }


def h1_random_error(coherence: np.ndarray, independent: float) -> np.ndarray:
    """Normalised random error of ``|H1|`` (Bendat & Piersol 2010, Table 9.6).

    Parameters
    ----------
    coherence
        γ², 0 … 1.
    independent
        Number of independent averages ``n_d`` (see :func:`independent_averages`).

    Returns
    -------
    ε = √(1 − γ²) / (|γ| √(2 n_d)), relative; ``inf`` where γ² = 0.

    Examples
    --------
    >>> float(h1_random_error(np.array([0.99]), 100)[0])  # doctest: +NUMBER
    0.00711
    """
    g2 = np.clip(np.asarray(coherence, dtype=float), 0.0, 1.0)
    if not independent > 0:
        raise InputError(f"independent averages must be positive, got {independent!r}")
    with np.errstate(divide="ignore"):
        return np.sqrt(1.0 - g2) / (np.sqrt(g2) * math.sqrt(2.0 * independent))


def independent_averages(segments: int, window: np.ndarray, step_frames: int) -> float:
    """Equivalent number of independent averages of overlapped Welch segments.

    Welch (1967, eq. 9-10): the variance of the average of ``K`` segments whose windows
    overlap is that of ``K / (1 + 2 Σ_j (1 − j/K) ρ(j)²)`` independent ones, with
    ``ρ(j) = Σ w[n] w[n + jR] / Σ w[n]²`` the window's overlap correlation at a shift of
    ``j`` steps of ``R`` samples.

    Examples
    --------
    >>> from scipy.signal import get_window
    >>> w = get_window("hann", 1024)
    >>> round(independent_averages(100, w, 512), 1)   # Hann, 50 % overlap
    94.8
    >>> independent_averages(10, w, 1024)             # no overlap: independent
    10.0
    """
    w = np.asarray(window, dtype=float)
    energy = float(np.dot(w, w))
    total = 0.0
    j = 1
    while j < segments and j * step_frames < w.size:
        rho = float(np.dot(w[: w.size - j * step_frames], w[j * step_frames :])) / energy
        total += (1.0 - j / segments) * rho**2
        j += 1
    return segments / (1.0 + 2.0 * total)


@dataclass(frozen=True)
class Decision:
    """The outcome of a decision rule.

    Attributes
    ----------
    accepted
        True when the value is accepted under the rule.
    rule
        ``"simple"`` or ``"guarded"``.
    acceptance_low, acceptance_high
        The acceptance interval actually applied (limits narrowed by the guard band).

    Examples
    --------
    A one-sided limit leaves the other side open:

    >>> d = decide(-38.2, low=-40.0, high=None, expanded_uncertainty=0.3, rule="guarded")
    >>> d.accepted, d.rule, round(d.acceptance_low, 6), d.acceptance_high
    (True, 'guarded', -39.7, inf)
    """

    accepted: bool
    rule: str
    acceptance_low: float
    acceptance_high: float


def decide(
    value: float,
    *,
    low: float | None,
    high: float | None,
    expanded_uncertainty: float = 0.0,
    rule: str = "simple",
) -> Decision:
    """Accept or reject ``value`` against tolerance limits under a decision rule.

    ``"simple"`` accepts inside the limits (shared risk); ``"guarded"`` accepts only
    inside the limits narrowed on each side by the guard band ``w = U`` (JCGM 106:2012,
    8.3.2; ISO 14253-1:2017), so a value whose uncertainty interval crosses a limit is
    rejected.

    Examples
    --------
    >>> decide(10.9, low=9.0, high=11.0, expanded_uncertainty=0.2).accepted
    True
    >>> d = decide(10.9, low=9.0, high=11.0, expanded_uncertainty=0.2, rule="guarded")
    >>> d.accepted, round(d.acceptance_high, 6)
    (False, 10.8)
    """
    if rule not in ("simple", "guarded"):
        raise InputError(f"decision rule must be 'simple' or 'guarded', got {rule!r}")
    if not (math.isfinite(expanded_uncertainty) and expanded_uncertainty >= 0):
        raise InputError(
            f"expanded uncertainty must be finite and not negative, got {expanded_uncertainty!r}"
        )
    guard = expanded_uncertainty if rule == "guarded" else 0.0
    lo = -math.inf if low is None else low + guard
    hi = math.inf if high is None else high - guard
    return Decision(bool(lo <= value <= hi), rule, lo, hi)
