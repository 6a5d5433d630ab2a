"""The Butterworth–Van Dyke equivalent circuit of a piezo element, fitted per mode.

Near one resonance an element behaves as its clamped capacitance C0 in parallel with a
series R1–L1–C1 branch (the motional branch: mass, compliance and mechanical loss seen
from the electrodes); the dielectric-loss form adds a resistor R0 parallel to C0. The
relations used are those of IEEE Std 176-1987 (IEEE Standard on Piezoelectricity,
clauses on the equivalent circuit and the resonance frequencies) and EN 50324-2:2002
(which carries the IEC 60483 methods):

- series and parallel resonance fs = 1/(2π√(L1C1)), fp = 1/(2π√(L1·C0C1/(C0+C1)));
- mechanical quality factor Qm = (1/R1)·√(L1/C1);
- effective coupling k_eff² = (fp² − fs²)/fp² = C1/(C0 + C1);
- fm, fn: frequencies of minimum and maximum |Z|; fr, fa: the zero-phase frequencies
  (resonance and antiresonance), which exist only when Qm·k_eff² is large enough.

:func:`fit_modes` finds the resonances of a sweep and fits the circuit to the points
around each one by non-linear least squares (scipy's trust-region reflective solver) on
the relative error of Z. Standard uncertainties come from the fit's covariance
s²(JᵀJ)⁻¹ (s² the residual variance), propagated to every derived quantity through its
numerical gradient (JCGM 100:2008, GUM, 5.1.2). :func:`material_coupling` turns fs and
fp of a named mode of a disc, plate or bar into the material coupling factor.
"""

from __future__ import annotations

import itertools
import math
from collections.abc import Callable, Sequence
from dataclasses import dataclass, field

import numpy as np
from scipy import optimize
from scipy import signal as sps

from piezo.element.impedance import ImpedanceSweep
from piezo.errors import InputError

__all__ = [
    "SHAPES",
    "BvdCircuit",
    "ImpedanceAnalysis",
    "MaterialCoupling",
    "ModeFit",
    "analyse_impedance",
    "fit_mode",
    "fit_modes",
    "material_coupling",
]


@dataclass(frozen=True)
class BvdCircuit:
    """A Butterworth–Van Dyke circuit (optionally with the dielectric loss resistor R0).

    Examples
    --------
    The circuit of docs/element.md: C0 = 2.2 nF, L1 = 0.12 H, C1 = 0.25 nF, R1 = 35 Ω.

    >>> c = BvdCircuit(c0_f=2.2e-9, r1_ohm=35.0, l1_h=0.12, c1_f=0.25e-9)
    >>> round(c.fs_hz, 1), round(c.fp_hz, 1), round(c.k_eff, 4), round(c.qm, 1)
    (29057.6, 30664.2, 0.3194, 626.0)
    """

    c0_f: float
    r1_ohm: float
    l1_h: float
    c1_f: float
    r0_ohm: float | None = None

    @property
    def fs_hz(self) -> float:
        """Series (motional) resonance 1/(2π√(L1C1)), Hz."""
        return 1.0 / (2.0 * math.pi * math.sqrt(self.l1_h * self.c1_f))

    @property
    def fp_hz(self) -> float:
        """Parallel resonance 1/(2π√(L1·C0C1/(C0+C1))), Hz."""
        ce = self.c0_f * self.c1_f / (self.c0_f + self.c1_f)
        return 1.0 / (2.0 * math.pi * math.sqrt(self.l1_h * ce))

    @property
    def qm(self) -> float:
        """Mechanical quality factor (1/R1)·√(L1/C1)."""
        return math.sqrt(self.l1_h / self.c1_f) / self.r1_ohm

    @property
    def k_eff(self) -> float:
        """Effective coupling √((fp² − fs²)/fp²) = √(C1/(C0 + C1))."""
        return math.sqrt(self.c1_f / (self.c0_f + self.c1_f))

    def impedance(self, frequency_hz: np.ndarray | float) -> np.ndarray:
        """Complex impedance at ``frequency_hz``, Ω."""
        w = 2.0 * np.pi * np.asarray(frequency_hz, dtype=np.float64)
        zm = self.r1_ohm + 1j * w * self.l1_h + 1.0 / (1j * w * self.c1_f)
        g0 = 0.0 if self.r0_ohm is None else 1.0 / self.r0_ohm
        return 1.0 / (1j * w * self.c0_f + g0 + 1.0 / zm)


#: Quantities of a mode fit that carry a standard uncertainty (keys of ``ModeFit.u``).
FIT_QUANTITIES = (
    "fs_hz", "fp_hz", "fm_hz", "fn_hz", "fr_hz", "fa_hz", "c0_f", "r1_ohm", "l1_h", "c1_f",
    "r0_ohm", "qm", "k_eff",
)  # fmt: skip


@dataclass(frozen=True)
class ModeFit:
    """The circuit fitted to one resonance mode, with standard uncertainties.

    Attributes
    ----------
    model
        ``"BVD"`` or ``"BVD+R0"`` (dielectric loss resistor parallel to C0).
    band_hz
        Frequencies fitted, (low, high), Hz; ``points`` points.
    fs_hz, fp_hz
        Series and parallel resonance, Hz.
    fm_hz, fn_hz
        Frequencies of minimum and maximum |Z| of the fitted circuit (None: none in
        the band).
    fr_hz, fa_hz
        Zero-phase resonance and antiresonance (None when the phase stays negative).
    c0_f, r1_ohm, l1_h, c1_f, r0_ohm
        Circuit elements (R0 None for the plain BVD).
    qm, k_eff
        Mechanical quality factor and effective coupling.
    u
        Standard uncertainty of each quantity above (same key), from the fit.
    residual_rms
        RMS relative error |Z_fit − Z|/|Z| over the fitted points.

    Examples
    --------
    A fit to an exact circuit recovers its elements; the six frequencies of a lossy
    resonator come in the order fm < fs < fr and fa < fp < fn (IEEE Std 176-1987):

    >>> import numpy as np
    >>> c = BvdCircuit(c0_f=2.2e-9, r1_ohm=35.0, l1_h=0.12, c1_f=0.25e-9)
    >>> f = np.linspace(27e3, 33e3, 1201)
    >>> fit = fit_mode(ImpedanceSweep(f, c.impedance(f)), (27e3, 33e3))
    >>> fit.model, round(fit.r1_ohm, 3), round(fit.c0_f * 1e9, 3), round(fit.c1_f * 1e9, 3)
    ('BVD', 35.0, 2.2, 0.25)
    >>> fit.fm_hz < fit.fs_hz < fit.fr_hz, fit.fa_hz < fit.fp_hz < fit.fn_hz
    (True, True)
    >>> round(fit.circuit.l1_h, 6), fit.residual_rms < 1e-9
    (0.12, True)
    """

    model: str
    band_hz: tuple[float, float]
    points: int
    fs_hz: float
    fp_hz: float
    fm_hz: float | None
    fn_hz: float | None
    fr_hz: float | None
    fa_hz: float | None
    c0_f: float
    r1_ohm: float
    l1_h: float
    c1_f: float
    r0_ohm: float | None
    qm: float
    k_eff: float
    residual_rms: float
    u: dict[str, float | None] = field(default_factory=dict)

    @property
    def circuit(self) -> BvdCircuit:
        """The fitted circuit."""
        return BvdCircuit(self.c0_f, self.r1_ohm, self.l1_h, self.c1_f, self.r0_ohm)


def _circuit(theta: np.ndarray, loss: bool) -> BvdCircuit:
    fs, ln_q, ln_c1, ln_c0 = (float(v) for v in theta[:4])
    ws = 2.0 * math.pi * fs
    c1 = math.exp(ln_c1)
    l1 = 1.0 / (ws * ws * c1)
    r1 = 1.0 / (ws * c1 * math.exp(ln_q))
    c0 = math.exp(ln_c0)
    r0 = None
    if loss:
        g0 = float(theta[4]) * ws * c0
        r0 = 1.0 / g0 if g0 > 0 else math.inf
    return BvdCircuit(c0, r1, l1, c1, r0)


def _model_z(theta: np.ndarray, f: np.ndarray, loss: bool) -> np.ndarray:
    fs, ln_q, ln_c1, ln_c0 = theta[:4]
    ws = 2.0 * np.pi * fs
    c1 = np.exp(ln_c1)
    w = 2.0 * np.pi * f
    zm = (1.0 / (ws * c1 * np.exp(ln_q))) + 1j * (w / (ws * ws * c1) - 1.0 / (w * c1))
    c0 = np.exp(ln_c0)
    g0 = theta[4] * ws * c0 if loss else 0.0
    return 1.0 / (1j * w * c0 + g0 + 1.0 / zm)


def _extremes(c: BvdCircuit, lo: float, hi: float) -> dict[str, float | None]:
    """fm, fn (extremes of |Z|) and fr, fa (zero crossings of X) of a circuit in a band."""
    width = c.fs_hz / max(c.qm, 1.0)
    a = max(lo, c.fs_hz - 20.0 * width)
    b = min(hi, c.fp_hz + 20.0 * width)
    out: dict[str, float | None] = {"fm_hz": None, "fn_hz": None, "fr_hz": None, "fa_hz": None}
    if not b > a:
        return out
    grid = np.linspace(a, b, 4001)
    z = c.impedance(grid)
    mag = np.log(np.abs(z))

    def refine(k: int, sign: float) -> float | None:
        if k <= 0 or k >= grid.size - 1:
            return None
        res = optimize.minimize_scalar(
            lambda f: sign * float(np.log(np.abs(c.impedance(f)))),
            bounds=(grid[k - 1], grid[k + 1]),
            method="bounded",
            options={"xatol": 1e-9 * grid[k]},
        )
        return float(res.x)

    out["fm_hz"] = refine(int(np.argmin(mag)), 1.0)
    k_min = int(np.argmin(mag))
    k_max = k_min + int(np.argmax(mag[k_min:]))
    out["fn_hz"] = refine(k_max, -1.0)
    x = z.imag
    crossings = np.flatnonzero(np.sign(x[:-1]) != np.sign(x[1:]))
    roots = [
        float(optimize.brentq(lambda f: float(c.impedance(f).imag), grid[i], grid[i + 1]))
        for i in crossings[:2]
    ]
    if len(roots) == 2:
        out["fr_hz"], out["fa_hz"] = roots
    return out


def _derived(theta: np.ndarray, loss: bool, band: tuple[float, float]) -> dict[str, float | None]:
    c = _circuit(theta, loss)
    values: dict[str, float | None] = {
        "fs_hz": c.fs_hz,
        "fp_hz": c.fp_hz,
        "c0_f": c.c0_f,
        "r1_ohm": c.r1_ohm,
        "l1_h": c.l1_h,
        "c1_f": c.c1_f,
        "r0_ohm": c.r0_ohm,
        "qm": c.qm,
        "k_eff": c.k_eff,
    }
    values.update(_extremes(c, *band))
    return values


def _propagate(
    fn: Callable[[np.ndarray], dict[str, float | None]], theta: np.ndarray, cov: np.ndarray
) -> dict[str, float | None]:
    """Standard uncertainties of fn(theta) by central differences (GUM 5.1.2)."""
    base = fn(theta)
    sd = np.sqrt(np.clip(np.diag(cov), 0.0, None))
    grads: dict[str, list[float]] = {k: [] for k in base}
    ok = {k: v is not None and math.isfinite(v) for k, v in base.items()}
    for i in range(theta.size):
        h = max(sd[i] * 1e-2, 1e-10 * max(abs(theta[i]), 1.0))
        up, dn = theta.copy(), theta.copy()
        up[i] += h
        dn[i] -= h
        a, b = fn(up), fn(dn)
        for k in base:
            va, vb = a.get(k), b.get(k)
            if (
                not ok[k]
                or va is None
                or vb is None
                or not (math.isfinite(va) and math.isfinite(vb))
            ):
                ok[k] = False
                continue
            grads[k].append((va - vb) / (2 * h))
    out: dict[str, float | None] = {}
    for k in base:
        if not ok[k]:
            out[k] = None
            continue
        g = np.asarray(grads[k])
        out[k] = float(math.sqrt(max(float(g @ cov @ g), 0.0)))
    return out


def _initial(f: np.ndarray, z: np.ndarray, k: int) -> np.ndarray:
    """Start values from the conductance peak at index ``k`` (fs, Qm, C1, C0)."""
    y = 1.0 / z
    g = y.real
    g_bg = float(np.percentile(g, 10))
    peak = float(g[k]) - g_bg
    if not peak > 0:
        peak = float(np.abs(y[k]))
    half = g_bg + peak / 2.0
    lo = k
    while lo > 0 and g[lo - 1] > half:
        lo -= 1
    hi = k
    while hi < f.size - 1 and g[hi + 1] > half:
        hi += 1
    step = float(np.median(np.diff(f)))
    width = max(float(f[hi] - f[lo]), 2.0 * step)
    fs = float(f[k])
    q = max(fs / width, 2.0)
    ws = 2.0 * math.pi * fs
    r1 = 1.0 / peak
    c1 = 1.0 / (ws * q * r1)
    # At fs the motional branch is real, so B(fs) = ωs C0; a neighbouring mode's branch
    # can lower it, which the median of B/ω over the band (mostly away from fs) catches.
    c0 = max(float(y[k].imag) / ws, float(np.median(y.imag / (2 * np.pi * f))))
    if not c0 > 0:
        c0 = float(np.median(np.abs(y.imag) / (2 * np.pi * f)))
    return np.array([fs, math.log(q), math.log(c1), math.log(c0)])


def fit_mode(
    sweep: ImpedanceSweep,
    band_hz: tuple[float, float],
    *,
    dielectric_loss: bool | None = None,
) -> ModeFit:
    """Fit the BVD circuit to the points of ``sweep`` inside ``band_hz``.

    Parameters
    ----------
    sweep
        The impedance sweep.
    band_hz
        (low, high) frequencies of the points to fit; the resonance is the largest
        conductance peak inside it.
    dielectric_loss
        True: fit the form with R0; False: the plain BVD; None (default): fit both and
        keep R0 only when it is more than two standard uncertainties from infinite
        (conductance 1/R0 > 2 u) and lowers the residual.

    Raises
    ------
    InputError
        Fewer than 8 points in the band, or no resonance in it.

    Examples
    --------
    >>> import numpy as np
    >>> c = BvdCircuit(c0_f=2.2e-9, r1_ohm=35.0, l1_h=0.12, c1_f=0.25e-9)
    >>> f = np.linspace(27e3, 33e3, 1201)
    >>> fit = fit_mode(ImpedanceSweep(f, c.impedance(f)), (27e3, 33e3))
    >>> round(fit.fs_hz, 1), round(fit.qm, 1), round(fit.k_eff, 4)
    (29057.6, 626.0, 0.3194)
    """
    lo, hi = float(band_hz[0]), float(band_hz[1])
    if not (0 < lo < hi):
        raise InputError(f"band_hz must be (low, high) with 0 < low < high, got {band_hz!r}")
    sel = (sweep.frequency_hz >= lo) & (sweep.frequency_hz <= hi)
    f = sweep.frequency_hz[sel]
    z = sweep.impedance_ohm[sel]
    if f.size < 8:
        raise InputError(
            f"only {f.size} points between {lo:.6g} and {hi:.6g} Hz: a circuit fit needs 8 "
            "or more",
            source=sweep.source,
        )
    y = 1.0 / z
    # The conductance peaks at the series resonance (|Y| may grow more with frequency
    # through C0 than a weak mode raises it).
    k = int(np.argmax(y.real))
    start = _initial(f, z, k)
    scale = np.abs(z)

    def run(loss: bool) -> tuple[np.ndarray, np.ndarray, float]:
        x0 = np.append(start, 1e-3) if loss else start
        # Qm between 0.5 and 10⁷ (beyond any element) keeps exp() finite.
        # and capacitances between 1 aF and 1 F keep exp() finite.
        lower = [f[0], math.log(0.5), math.log(1e-18), math.log(1e-18)] + ([0.0] if loss else [])
        upper = [f[-1], math.log(1e7), 0.0, 0.0] + ([np.inf] if loss else [])
        x0 = np.clip(x0, np.add(lower, 1e-9), np.subtract(upper, 1e-9))
        if loss:
            x0[4] = 1e-3

        def resid(theta: np.ndarray) -> np.ndarray:
            r = (_model_z(theta, f, loss) - z) / scale
            return np.concatenate([r.real, r.imag])

        res = optimize.least_squares(
            resid, x0, bounds=(lower, upper), x_scale="jac", method="trf",
            xtol=1e-14, ftol=1e-14, gtol=1e-14, max_nfev=2000,
        )  # fmt: skip
        dof = max(2 * f.size - x0.size, 1)
        s2 = float(2.0 * res.cost / dof)
        jac = res.jac
        cov = np.linalg.pinv(jac.T @ jac) * s2
        return res.x, cov, math.sqrt(2.0 * res.cost / f.size / 2.0)

    if dielectric_loss is None:
        theta0, cov0, rms0 = run(False)
        theta1, cov1, rms1 = run(True)
        g0 = theta1[4]
        u_g0 = math.sqrt(max(cov1[4, 4], 0.0))
        use_loss = g0 > 2.0 * u_g0 and rms1 < rms0
        theta, cov, rms = (theta1, cov1, rms1) if use_loss else (theta0, cov0, rms0)
    else:
        use_loss = bool(dielectric_loss)
        theta, cov, rms = run(use_loss)
    band = (float(f[0]), float(f[-1]))
    values = _derived(theta, use_loss, band)
    u = _propagate(lambda t: _derived(t, use_loss, band), theta, cov)
    if not use_loss:
        u["r0_ohm"] = None
    return ModeFit(
        model="BVD+R0" if use_loss else "BVD",
        band_hz=band,
        points=int(f.size),
        fs_hz=float(values["fs_hz"]),  # type: ignore[arg-type]
        fp_hz=float(values["fp_hz"]),  # type: ignore[arg-type]
        fm_hz=values["fm_hz"],
        fn_hz=values["fn_hz"],
        fr_hz=values["fr_hz"],
        fa_hz=values["fa_hz"],
        c0_f=float(values["c0_f"]),  # type: ignore[arg-type]
        r1_ohm=float(values["r1_ohm"]),  # type: ignore[arg-type]
        l1_h=float(values["l1_h"]),  # type: ignore[arg-type]
        c1_f=float(values["c1_f"]),  # type: ignore[arg-type]
        r0_ohm=values["r0_ohm"] if use_loss else None,
        qm=float(values["qm"]),  # type: ignore[arg-type]
        k_eff=float(values["k_eff"]),  # type: ignore[arg-type]
        residual_rms=float(rms),
        u=u,
    )


#: A resonance must rise this far (dB of |Y|) above its surroundings to count as a mode.
MIN_PROMINENCE_DB = 3.0
#: Coherence γ² below which a measured point cannot carry a mode. Uncorrelated signals
#: average to γ² ≈ 1/n_d over n_d independent segments (Bendat & Piersol, Random Data,
#: 4th ed., 2010, section 9.2.3), at most about 0.15 with the 8 or more segments of a V/I
#: measurement; a resonance narrower than the analysis bins lowers γ² at its peak by
#: leakage, but not around it. A median of 0.5 over the peak's neighbourhood separates
#: the two.
MIN_COHERENCE = 0.5


def find_mode_bands(
    sweep: ImpedanceSweep, *, max_modes: int = 8, min_prominence_db: float = MIN_PROMINENCE_DB
) -> list[tuple[float, float]]:
    """Bands around each resonance of a sweep, for :func:`fit_mode`.

    A resonance is a maximum of |Y| (a minimum of |Z|) standing ``min_prominence_db``
    above its surroundings (scipy.signal.find_peaks' prominence); in a measured sweep,
    also with coherence of at least :data:`MIN_COHERENCE`. Each band runs from
    1.5 (fn − fm) below the |Z| minimum fm to 1.5 (fn − fm) above the following |Z|
    maximum fn, and stops half way (in log frequency) to a neighbouring resonance.

    Examples
    --------
    >>> import numpy as np
    >>> c = BvdCircuit(c0_f=2.2e-9, r1_ohm=35.0, l1_h=0.12, c1_f=0.25e-9)
    >>> f = np.linspace(20e3, 40e3, 2001)
    >>> bands = find_mode_bands(ImpedanceSweep(f, c.impedance(f)))
    >>> [(round(lo), round(hi)) for lo, hi in bands]  # fm 29.06, fn 30.66 kHz, ± 2.4 kHz
    [(26660, 33060)]
    """
    f = sweep.frequency_hz
    ly = -20.0 * np.log10(sweep.magnitude_ohm)
    peaks, props = sps.find_peaks(ly, prominence=min_prominence_db)
    if sweep.coherence is not None:
        # A measured sweep: peaks where the coherence is low are noise, not modes. The
        # median over ±10 points: leakage may lower γ² at the peak itself.
        coh = sweep.coherence
        good = np.array(
            [np.median(coh[max(0, k - 10) : k + 11]) >= MIN_COHERENCE for k in peaks], dtype=bool
        )
        peaks = peaks[good]
        props = {"prominences": props["prominences"][good]}
    if peaks.size == 0:
        return []
    order = np.argsort(props["prominences"])[::-1][:max_modes]
    peaks = np.sort(peaks[order])
    edges = [0]
    for a, b in itertools.pairwise(peaks):
        mid = math.sqrt(f[a] * f[b])
        edges.append(int(np.searchsorted(f, mid)))
    edges.append(f.size)
    bands = []
    for i, k in enumerate(peaks):
        left, right = edges[i], edges[i + 1]
        k_n = k + int(np.argmax(-ly[k:right]))
        span = max(float(f[k_n] - f[k]), 3.0 * float(f[min(k + 1, f.size - 1)] - f[k]))
        lo_f = max(float(f[left]), float(f[k]) - 1.5 * span)
        hi_f = min(float(f[right - 1]), float(f[k_n]) + 1.5 * span)
        sel = np.flatnonzero((f >= lo_f) & (f <= hi_f))
        if sel.size < 12:
            lo_f, hi_f = float(f[left]), float(f[right - 1])
            sel = np.flatnonzero((f >= lo_f) & (f <= hi_f))
        if sweep.coherence is not None and np.mean(sweep.coherence[sel] >= MIN_COHERENCE) < 0.9:
            continue  # most of the band is not coherent: noise at a band edge, not a mode
        bands.append((lo_f, hi_f))
    return bands


def fit_modes(
    sweep: ImpedanceSweep,
    *,
    bands_hz: Sequence[tuple[float, float]] | None = None,
    max_modes: int = 8,
    dielectric_loss: bool | None = None,
) -> list[ModeFit]:
    """Fit every resonance of a sweep (or one per given band), in frequency order.

    Resonances found automatically (:func:`find_mode_bands`) whose fit does not
    determine them (Qm uncertain by 100 % or more, fs at the band's edge) are dropped;
    with ``bands_hz`` every band is fitted and reported.

    Examples
    --------
    >>> import numpy as np
    >>> c = BvdCircuit(c0_f=2.2e-9, r1_ohm=35.0, l1_h=0.12, c1_f=0.25e-9)
    >>> f = np.geomspace(1e3, 100e3, 4001)
    >>> [round(m.fs_hz) for m in fit_modes(ImpedanceSweep(f, c.impedance(f)))]
    [29058]
    """
    if bands_hz is not None:
        return [fit_mode(sweep, b, dielectric_loss=dielectric_loss) for b in bands_hz]
    fits = []
    for band in find_mode_bands(sweep, max_modes=max_modes):
        try:
            fit = fit_mode(sweep, band, dielectric_loss=dielectric_loss)
        except InputError:
            continue
        # Found automatically: keep a fit only if it determines its resonance (Qm known
        # to better than 100 %, fs inside the band, not at its edge).
        u_q = fit.u.get("qm")
        if u_q is None or not u_q < fit.qm or not band[0] < fit.fs_hz < band[1]:
            continue
        fits.append(fit)
    return fits


# --- Material coupling -----------------------------------------------------------------

#: Mode shapes of :func:`material_coupling` -> (coupling symbol, what it is).
SHAPES: dict[str, tuple[str, str]] = {
    "thickness": ("k_t", "thickness-extensional mode of a thin disc or plate"),
    "radial": ("k_p", "planar (radial) mode of a thin disc"),
    "length": ("k_33", "length-extensional mode of a bar poled along its length"),
    "transverse": ("k_31", "length-extensional mode of a bar poled across its length"),
    "shear": ("k_15", "thickness-shear mode of a plate poled along its length"),
}


@dataclass(frozen=True)
class MaterialCoupling:
    """A material coupling factor from fs and fp of a named mode.

    Examples
    --------
    The planar coupling of a disc with fs = 200 kHz and fp = 230 kHz:
    k_p² = 2.51 (30/230) - (30/230)² = 0.3104.

    >>> m = material_coupling("radial", 200e3, 230e3, u_fs_hz=100.0, u_fp_hz=100.0)
    >>> m.symbol, round(m.value, 4), round(m.u, 4)
    ('k_p', 0.5571, 0.0012)
    """

    shape: str
    symbol: str
    value: float
    u: float | None
    relation: str


def _coupling(shape: str, fs: float, fp: float) -> float:
    d = (fp - fs) / fp
    if shape in ("thickness", "length", "shear"):
        # k² = (π/2)(fs/fp) tan((π/2)(fp − fs)/fp): IEEE Std 176-1987 for the thickness
        # (k_t), length (k_33) and shear (k_15) modes; it is exact for the one-dimensional
        # resonator (zero of 1 − k² tan(x)/x at x = (π/2) fs/fp).
        k2 = (math.pi / 2) * (fs / fp) * math.tan((math.pi / 2) * d)
    elif shape == "transverse":
        # k31²/(1 − k31²) = (π/2)(fp/fs) tan((π/2)(fp − fs)/fs), IEEE Std 176-1987.
        r = (math.pi / 2) * (fp / fs) * math.tan((math.pi / 2) * (fp - fs) / fs)
        k2 = r / (1.0 + r)
    elif shape == "radial":
        # k_p² ≈ 2.51 (fp − fs)/fp − ((fp − fs)/fp)², the approximation EN 50324-2 and
        # IEEE Std 176 give for a thin disc with Poisson's ratio near 0.31.
        k2 = 2.51 * d - d * d
    else:
        raise InputError(f"shape must be one of {', '.join(SHAPES)}; got {shape!r}")
    return math.sqrt(k2) if k2 > 0 else math.nan


_RELATIONS = {
    "thickness": "k² = (π/2)(fs/fp)·tan((π/2)(fp−fs)/fp) (IEEE Std 176)",
    "length": "k² = (π/2)(fs/fp)·tan((π/2)(fp−fs)/fp) (IEEE Std 176)",
    "shear": "k² = (π/2)(fs/fp)·tan((π/2)(fp−fs)/fp) (IEEE Std 176)",
    "transverse": "k²/(1−k²) = (π/2)(fp/fs)·tan((π/2)(fp−fs)/fs) (IEEE Std 176)",
    "radial": "k² ≈ 2.51(fp−fs)/fp − ((fp−fs)/fp)² (EN 50324-2, IEEE Std 176)",
}


def material_coupling(
    shape: str, fs_hz: float, fp_hz: float, *, u_fs_hz: float = 0.0, u_fp_hz: float = 0.0
) -> MaterialCoupling:
    """Material coupling factor of a disc, plate or bar from its fs and fp.

    ``shape`` names the mode (:data:`SHAPES`). The uncertainty propagates u(fs) and u(fp)
    taken as uncorrelated (a conservative choice: the fit correlates them positively,
    which would shrink the uncertainty of their difference).

    Examples
    --------
    >>> m = material_coupling("thickness", 1.8e6, 2.0e6)
    >>> m.symbol, round(m.value, 4)
    ('k_t', 0.4732)
    """
    if shape not in SHAPES:
        raise InputError(f"shape must be one of {', '.join(SHAPES)}; got {shape!r}")
    if not (0 < fs_hz < fp_hz):
        raise InputError(
            f"need 0 < fs < fp for a coupling factor, got fs {fs_hz!r} Hz, fp {fp_hz!r} Hz"
        )
    value = _coupling(shape, fs_hz, fp_hz)
    h = 1e-7 * fs_hz
    dfs = (_coupling(shape, fs_hz + h, fp_hz) - _coupling(shape, fs_hz - h, fp_hz)) / (2 * h)
    dfp = (_coupling(shape, fs_hz, fp_hz + h) - _coupling(shape, fs_hz, fp_hz - h)) / (2 * h)
    u = math.hypot(dfs * u_fs_hz, dfp * u_fp_hz)
    return MaterialCoupling(shape, SHAPES[shape][0], value, u if math.isfinite(u) else None,
                            _RELATIONS[shape])  # fmt: skip


# --- Whole analysis --------------------------------------------------------------------


@dataclass(frozen=True)
class ImpedanceAnalysis:
    """Everything ``piezo impedance`` reports about one sweep.

    Attributes
    ----------
    sweep
        The sweep analysed.
    modes
        One fit per resonance, in frequency order.
    low_frequency_hz
        Frequency of the free capacitance and loss tangent (default 1 kHz).
    free_capacitance_f, tan_delta
        Parallel capacitance and loss tangent there (None when neither the sweep nor a
        fit reaches it).
    capacitance_source
        ``"measured"`` (interpolated in the sweep) or ``"model"`` (the fitted circuit of
        the lowest mode, C0 + C1 far below resonance: an extrapolation).
    material
        Material coupling of the lowest mode for the named shape, or None.

    Examples
    --------
    With R0 = 2 MΩ parallel to C0 + C1 = 2.45 nF, tan δ at 1 kHz is
    1 / (2π · 1 kHz · R0 · 2.45 nF) = 0.0325:

    >>> import numpy as np
    >>> c = BvdCircuit(c0_f=2.2e-9, r1_ohm=35.0, l1_h=0.12, c1_f=0.25e-9, r0_ohm=2e6)
    >>> f = np.concatenate([np.geomspace(500, 20e3, 60), np.linspace(27e3, 33e3, 1201)])
    >>> a = analyse_impedance(ImpedanceSweep(f, c.impedance(f)), shape="radial")
    >>> len(a.modes), a.modes[0].model, a.low_frequency_hz, round(a.tan_delta, 4)
    (1, 'BVD+R0', 1000.0, 0.0325)
    >>> a.material.symbol, round(a.material.value, 3)
    ('k_p', 0.359)
    """

    sweep: ImpedanceSweep
    modes: tuple[ModeFit, ...]
    low_frequency_hz: float
    free_capacitance_f: float | None
    tan_delta: float | None
    capacitance_source: str | None
    material: MaterialCoupling | None = None


def analyse_impedance(
    sweep: ImpedanceSweep,
    *,
    bands_hz: Sequence[tuple[float, float]] | None = None,
    max_modes: int = 8,
    dielectric_loss: bool | None = None,
    low_frequency_hz: float = 1000.0,
    shape: str | None = None,
) -> ImpedanceAnalysis:
    """Fit each mode, and give the free capacitance, tan δ and the material coupling.

    Examples
    --------
    >>> import numpy as np
    >>> c = BvdCircuit(c0_f=2.2e-9, r1_ohm=35.0, l1_h=0.12, c1_f=0.25e-9, r0_ohm=2e6)
    >>> f = np.concatenate([np.geomspace(500, 20e3, 60), np.linspace(27e3, 33e3, 1201)])
    >>> a = analyse_impedance(ImpedanceSweep(f, c.impedance(f)))
    >>> a.capacitance_source, round(a.free_capacitance_f * 1e9, 3)
    ('measured', 2.45)
    """
    if not (math.isfinite(low_frequency_hz) and low_frequency_hz > 0):
        raise InputError(f"low_frequency_hz must be positive, got {low_frequency_hz!r}")
    modes = tuple(
        fit_modes(sweep, bands_hz=bands_hz, max_modes=max_modes, dielectric_loss=dielectric_loss)
    )
    measured = sweep.capacitance_at(low_frequency_hz)
    cap: float | None
    tan_d: float | None
    source: str | None
    if measured is not None:
        cap, tan_d = measured
        source = "measured"
    elif modes and low_frequency_hz < modes[0].fs_hz:
        y = 1.0 / modes[0].circuit.impedance(low_frequency_hz)
        cap = float(y.imag) / (2 * math.pi * low_frequency_hz)
        tan_d = float(y.real / y.imag)
        source = "model"
    else:
        cap = tan_d = source = None
    material = None
    if shape is not None:
        if not modes:
            raise InputError("no resonance found: a material coupling needs fs and fp")
        m = modes[0]
        material = material_coupling(
            shape, m.fs_hz, m.fp_hz, u_fs_hz=m.u.get("fs_hz") or 0.0,
            u_fp_hz=m.u.get("fp_hz") or 0.0,
        )  # fmt: skip
    return ImpedanceAnalysis(sweep, modes, float(low_frequency_hz), cap, tan_d, source, material)
