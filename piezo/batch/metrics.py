"""Metric extractors: the batch's glue to piezo's analyses.

Each extractor takes a :class:`~piezo.batch.capture.CaptureAnalysis` (one capture, whole,
in volts at the sensor) and a :class:`~piezo.batch.spec.MetricSpec`, runs the analysis
it needs through :meth:`CaptureAnalysis.cached` (so the swept response that feeds five
metrics is computed once per capture) and returns a
:class:`~piezo.batch.verdict.MetricValue`. No analysis is implemented here: the numbers
come from :mod:`piezo.response.measure` and :mod:`piezo.response.fit` (swept sine),
:mod:`piezo.tone.analysis`
(test tones), :mod:`piezo.diagnostics.checker` (clipping), :mod:`piezo.levels.weighting` and
:mod:`piezo.levels.stats` (noise levels) and :mod:`piezo.spectral.bands` (band levels).

A metric that cannot be determined returns ``MetricValue(None, reason=...)``, which the
verdict turns into "not evaluable", never into a pass.
"""

from __future__ import annotations

import dataclasses
import math
from collections.abc import Callable, Mapping
from typing import Any

import numpy as np

from piezo.batch.capture import CaptureAnalysis
from piezo.batch.spec import MetricSpec
from piezo.batch.verdict import MetricValue
from piezo.diagnostics.checker import check_capture
from piezo.errors import InputError
from piezo.levels.stats import SignalStats
from piezo.levels.weighting import FrequencyWeighting
from piezo.response.fit import deviation_from_golden, fit_response, sensitivity_at
from piezo.response.measure import analyze_sweep
from piezo.response.stimulus import SweepSpec, stimulus_from_toml, sweep_spec
from piezo.spectral.bands import band_levels
from piezo.tone.analysis import measure_tone

__all__ = ["EXTRACTORS", "report_data", "sweep_stimulus"]


def _db(ratio: float) -> float:
    return 20.0 * math.log10(ratio) if ratio > 0 else -math.inf


# ---------------------------------------------------------------------------------------
# Swept sine: piezo.response.stimulus, piezo.response.measure, piezo.response.fit.


def sweep_stimulus(params: Mapping[str, Any], sample_rate_hz: float) -> Any:
    """The :class:`piezo.response.stimulus.SweepSpec` of the spec's sweep at the capture's rate.

    Examples
    --------
    The spec's sweep at the capture's rate; the fades the spec leaves out get defaults:

    >>> from piezo.batch.spec import load_spec
    >>> spec = load_spec("recordings/pd27-spec.toml")
    >>> stim = sweep_stimulus(spec.stimulus.params, 16000.0)
    >>> stim.start_hz, stim.stop_hz, stim.duration_s, stim.sample_rate_hz
    (20.0, 7000.0, 0.6, 16000.0)
    >>> stim.silence_before_s, stim.silence_after_s
    (0.2, 0.2)
    """
    if params.get("file_data") is not None:
        stim = stimulus_from_toml(params["file_data"], source=params.get("file"))
        if not isinstance(stim, SweepSpec):
            raise InputError(f"{params.get('file')}: not an exponential sine sweep")
        if not math.isclose(stim.sample_rate_hz, sample_rate_hz, rel_tol=1e-9):
            raise InputError(
                f"the capture's sample rate ({sample_rate_hz:g} Hz) differs from the "
                f"stimulus's ({stim.sample_rate_hz:g} Hz)"
            )
        return stim
    return sweep_spec(
        params["start_hz"],
        params["stop_hz"],
        params["duration_s"],
        sample_rate_hz,
        fade_in_s=params.get("fade_in_s"),
        fade_out_s=params.get("fade_out_s"),
        silence_before_s=params.get("silence_before_s", 0.0),
        silence_after_s=params.get("silence_after_s", 0.0),
    )


def _sweep_response(a: CaptureAnalysis) -> Any:
    """The swept response in V per unit of the line's quantity when the level is known.

    :func:`~piezo.response.measure.analyze_sweep` scales by the stimulus level whatever
    its quantity (it names it Pa); the unit is the spec's, and the reference sensor's
    chart is undone (:func:`_chart_factor`).
    """

    def compute() -> Any:
        cap = a.capture
        stimulus = a.spec.stimulus
        stim = sweep_stimulus(stimulus.params, cap.sample_rate_hz)
        level = stimulus.level_value
        # Every sweep metric is a magnitude or a distortion: no pure-delay fit needed.
        r = analyze_sweep(
            cap.samples,
            stim,
            cap.sample_rate_hz,
            unit="V",
            acoustic_level_pa=level,
            pure_delay=False,
        )
        if level is None or (a.spec.measurand.default and a.spec.response_curve is None):
            return r
        return dataclasses.replace(
            r,
            response=r.response * _chart_factor(a, r.frequency_hz),
            magnitude_unit=a.spec.measurand.sensitivity_unit,
        )

    return a.cached("sweep_response", compute)


def _chart_factor(a: CaptureAnalysis, frequency_hz: Any) -> Any:
    """Factor from "volts per stimulus level" to the unit's sensitivity, from the chart
    of the line's reference sensor (``[capture] response_curve``); 1 without one.

    The stimulus level is what the reference sensor reads. Where its chart says it
    reads ``relative_db`` high (the convention of :mod:`piezo.chain.curve`), the true
    stimulus is that much lower and the unit's sensitivity that much higher:
    S_unit(f) = S_ref(f)/S_ref · V(f)/level, the comparison of ISO 16063-21:2003 with
    the reference's output held at the level. Magnitude only: the batch judges
    magnitudes, and the chart's phase (if any) is left out.
    """
    curve = a.spec.response_curve
    f = np.asarray(frequency_hz, dtype=float)
    if curve is None:
        return np.ones_like(f)
    return 10.0 ** (curve.relative_db_at(f) / 20.0)


def _reference_hz(a: CaptureAnalysis) -> float:
    for m in a.spec.metrics:
        if m.kind == "sensitivity":
            return float(m.params["reference_hz"])
    return 1000.0


def _response_fit(a: CaptureAnalysis) -> Any:
    def compute() -> Any:
        r = _sweep_response(a)
        return fit_response(
            r.frequency_hz,
            r.magnitude_db,
            reference_hz=_reference_hz(a),
            magnitude_unit=r.magnitude_unit,
        )

    return a.cached("response_fit", compute)


def _response_at(a: CaptureAnalysis, frequency_hz: float) -> float:
    r = _sweep_response(a)
    return sensitivity_at(r.frequency_hz, r.magnitude_db, reference_hz=frequency_hz)


def _sweep_sensitivity(a: CaptureAnalysis, m: MetricSpec) -> MetricValue:
    value = _response_at(a, float(m.params["reference_hz"]))
    return _sensitivity_value(a, m, value, float(m.params["reference_hz"]))


def _sensitivity_value(
    a: CaptureAnalysis, m: MetricSpec, value: float, frequency_hz: float
) -> MetricValue:
    """A sensitivity value, with a note as detail where the reference chart does not
    reach its frequency (its trade form is added by the verdict's messages)."""
    curve = a.spec.response_curve
    note = None if curve is None else curve.coverage_note(frequency_hz, frequency_hz)
    detail = None if note is None else f"reference chart {a.spec.response_curve_file}: {note}"
    return MetricValue(value, detail=detail)


def _corner(a: CaptureAnalysis, m: MetricSpec) -> MetricValue:
    fit = _response_fit(a)
    r = _sweep_response(a)
    low = float(r.frequency_hz[0])
    if fit.highpass is None:
        return MetricValue(
            None, reason=f"no low-frequency roll-off measured: corner below {low:.3g} Hz"
        )
    if not fit.highpass.in_band:
        return MetricValue(
            None,
            reason=f"corner {fit.highpass.corner_hz:.3g} Hz is outside the measured band "
            f"({low:.3g}-{float(r.frequency_hz[-1]):.3g} Hz): an extrapolation",
        )
    return MetricValue(
        fit.highpass.corner_hz,
        detail=f"order {fit.highpass.order}",
        uncertainty=_finite(fit.highpass.corner_std_hz),
    )


def _resonance(a: CaptureAnalysis, m: MetricSpec) -> MetricValue:
    fit = _response_fit(a)
    if fit.resonance is None:
        return MetricValue(None, reason="no resonance peak inside the measured band")
    res = fit.resonance
    return MetricValue(
        res.frequency_hz,
        detail=f"Q {res.q:.3g}, peak +{res.peak_db:.3g} dB",
        # A poor fit's covariance understates the error: no uncertainty is claimed.
        uncertainty=None if res.poor_fit else _finite(res.frequency_std_hz),
    )


def _sweep_thd(a: CaptureAnalysis, m: MetricSpec) -> MetricValue:
    f = float(m.params["frequency_hz"])
    value = _sweep_response(a).thd_percent_at([f])[f]
    if not math.isfinite(value):
        return MetricValue(None, reason=f"distortion not measurable at {f:g} Hz")
    return MetricValue(value)


def _relative_offset(a: CaptureAnalysis, m: MetricSpec) -> float:
    f = m.params.get("relative_to_hz")
    return 0.0 if f is None else _response_at(a, float(f))


def _response_mask(a: CaptureAnalysis, m: MetricSpec) -> MetricValue:
    freqs = [float(f) for f in m.params["frequency_hz"]]
    offset = _relative_offset(a, m)
    curve = [_response_at(a, f) - offset for f in freqs]
    return _mask_value(m, freqs, curve, "Hz")


def _mask_value(m: MetricSpec, freqs: list[float], curve: list[float], unit: str) -> MetricValue:
    """Worst margin of ``curve`` inside the mask (negative: outside), and where."""
    margins: list[tuple[float, float, str]] = []
    lower, upper = m.params.get("lower_db"), m.params.get("upper_db")
    for i, (f, v) in enumerate(zip(freqs, curve, strict=True)):
        if lower is not None:
            margins.append((v - lower[i], f, "below"))
        if upper is not None:
            margins.append((upper[i] - v, f, "above"))
    if not margins:
        return MetricValue(None, reason="the mask has no lower_db or upper_db", curve=tuple(curve))
    margin, f, side = min(margins)
    detail = f"{side} the mask at {f:g} {unit}" if margin < 0 else f"closest at {f:g} {unit}"
    return MetricValue(margin, detail=detail, curve=tuple(curve))


def _golden_deviation(a: CaptureAnalysis, m: MetricSpec) -> MetricValue:
    r = _sweep_response(a)
    golden = m.params["golden_data"]
    dev = deviation_from_golden(
        r.frequency_hz,
        r.magnitude_db,
        np.asarray(golden["frequency_hz"]),
        np.asarray(golden["magnitude_db"]),
        align_at_hz=m.params.get("relative_to_hz"),
    )
    f = np.asarray(dev.frequency_hz)
    d = np.asarray(dev.deviation_db)
    band = m.params.get("band_hz")
    if band is not None:
        keep = (f >= band[0]) & (f <= band[1])
        f, d = f[keep], d[keep]
    if f.size == 0:
        return MetricValue(None, reason="no golden frequency inside band_hz and the measurement")
    worst = int(np.argmax(np.abs(d)))
    return MetricValue(float(abs(d[worst])), detail=f"{d[worst]:+.3g} dB at {f[worst]:g} Hz")


# ---------------------------------------------------------------------------------------
# Clipping: piezo.diagnostics.checker.


def _diagnostics(a: CaptureAnalysis) -> Any:
    def compute() -> Any:
        cap = a.capture
        # Clipping is a time-domain check: the diagnostic PSD (hum, roll-off) is not made.
        result = check_capture(
            cap.samples,
            cap.sample_rate_hz,
            full_scale=cap.clip_level_v,
            unit="V",
            spectral=False,
        )
        return result.channels[0]

    return a.cached("diagnostics", compute)


def _clipping(a: CaptureAnalysis, m: MetricSpec) -> MetricValue:
    clip = _diagnostics(a).clipping
    detail = f"{clip.clipped_samples} samples in {clip.events} event(s)"
    return MetricValue(float(clip.clipped_fraction), detail=detail)


# ---------------------------------------------------------------------------------------
# Noise in the quiet part: piezo.levels.weighting, piezo.levels.stats.


def _quiet_segment(a: CaptureAnalysis, m: MetricSpec) -> np.ndarray:
    """Samples of the quiet part: segment_s, or the stimulus's lead-in less 10 %.

    The last tenth of the lead-in is left out so the stimulus's first samples (and the
    acoustic delay's uncertainty) do not count as noise.
    """
    cap = a.capture
    fs = cap.sample_rate_hz
    seg = m.params.get("segment_s")
    if seg is None:
        seg = (0.0, 0.9 * float(a.spec.stimulus.params["silence_before_s"]))
    start, stop = round(seg[0] * fs), round(seg[1] * fs)
    if stop > cap.samples.size or stop - start < 16:
        raise InputError(
            f"quiet segment {seg[0]:g}-{seg[1]:g} s does not fit the capture "
            f"({cap.samples.size / fs:.3g} s)"
        )
    return cap.samples[start:stop]


def _weighted_rms(a: CaptureAnalysis, m: MetricSpec) -> float:
    x = _quiet_segment(a, m)
    weighting = m.params.get("weighting", "Z")
    if weighting != "Z":
        x = FrequencyWeighting(a.capture.sample_rate_hz, 1, weighting=weighting).update(
            x[:, None]
        )[:, 0]
    stats = SignalStats(1)
    stats.update((x - np.mean(x))[:, None])
    return float(stats.rms[0])


def _noise_floor(a: CaptureAnalysis, m: MetricSpec) -> MetricValue:
    rms = _weighted_rms(a, m)
    if rms <= 0:
        return MetricValue(None, reason="the quiet segment is digital silence")
    return MetricValue(_db(rms), detail=f"{m.params.get('weighting', 'Z')}-weighted")


def _self_noise(a: CaptureAnalysis, m: MetricSpec) -> MetricValue:
    rms = _weighted_rms(a, m)
    if rms <= 0:
        return MetricValue(None, reason="the quiet segment is digital silence")
    sens = _SENSITIVITY[a.spec.stimulus.kind](a, m).value
    if sens is None:
        return MetricValue(None, reason="sensitivity not measurable")
    # dB re 1 V, less dB re 1 V/unit, is dB re 1 unit; then re the level reference.
    return MetricValue(_db(rms) - sens + _db(1.0 / a.spec.measurand.reference))


# ---------------------------------------------------------------------------------------
# Test tones: piezo.tone.analysis.


def _tone(a: CaptureAnalysis) -> Any:
    def compute() -> Any:
        cap = a.capture
        params = a.spec.stimulus.params
        start = round(float(params.get("silence_before_s", 0.0)) * cap.sample_rate_hz)
        x = cap.samples[start:]
        if x.size < 16:
            raise InputError("no tone after the quiet lead-in: the capture is too short")
        # The strongest line is taken (no expected frequency): it must then be the
        # stimulus, see _checked_tone.
        return measure_tone(x, cap.sample_rate_hz)

    return a.cached("tone", compute)


def _checked_tone(a: CaptureAnalysis) -> Any:
    """The tone result, refusing a capture whose strongest tone is not the stimulus.

    The strongest line more than 2 % from the stimulus frequency (three times a class 1
    calibrator's ±0.7 % tolerance, IEC 60942) means that another tone, hum or noise
    dominates the capture, or that no tone was captured (our rule).
    """
    tone = _tone(a)
    expected = float(a.spec.stimulus.params["frequency_hz"])
    if not tone.tone_rms > 0 or abs(tone.frequency_hz / expected - 1.0) > 0.02:
        raise InputError(
            f"no {expected:g} Hz tone found (strongest tone at {tone.frequency_hz:.5g} Hz)"
        )
    return tone


def _tone_sensitivity(a: CaptureAnalysis, m: MetricSpec) -> MetricValue:
    level = a.spec.stimulus.level_value
    tone = _checked_tone(a)
    factor = float(_chart_factor(a, [float(a.spec.stimulus.params["frequency_hz"])])[0])
    value = _db(tone.tone_rms * factor / level)
    return _sensitivity_value(a, m, value, float(a.spec.stimulus.params["frequency_hz"]))


def _tone_thd(a: CaptureAnalysis, m: MetricSpec) -> MetricValue:
    return MetricValue(_checked_tone(a).thd_percent)


def _thd_n(a: CaptureAnalysis, m: MetricSpec) -> MetricValue:
    return MetricValue(_checked_tone(a).thd_n_percent)


def _tone_frequency(a: CaptureAnalysis, m: MetricSpec) -> MetricValue:
    return MetricValue(_checked_tone(a).frequency_hz)


# ---------------------------------------------------------------------------------------
# Band levels: piezo.spectral.bands.


def _band_mask(a: CaptureAnalysis, m: MetricSpec) -> MetricValue:
    fraction = int(m.params["fraction"])
    freqs = [float(f) for f in m.params["frequency_hz"]]

    def compute() -> Any:
        cap = a.capture
        start = round(
            float(a.spec.stimulus.params.get("silence_before_s", 0.0)) * cap.sample_rate_hz
        )
        if cap.samples.size - start < 16:
            raise InputError("nothing after the quiet lead-in: the capture is too short")
        return band_levels(
            cap.samples[start:],
            cap.sample_rate_hz,
            fraction=fraction,
            low_hz=min(freqs),
            high_hz=max(freqs),
        )

    result = a.cached(("bands", fraction, min(freqs), max(freqs)), compute)
    nominal = result.nominal_hz
    levels = result.level_db(1.0)[:, 0]
    curve = []
    for f in freqs:
        i = int(np.argmin(np.abs(np.log(nominal / f))))
        # A mask frequency names a band: within a quarter band of its mid-band.
        if abs(math.log2(nominal[i] / f)) > 1.0 / (4 * fraction):
            raise InputError(f"no 1/{fraction}-octave band at {f:g} Hz in the analysis")
        curve.append(float(levels[i]))
    return _mask_value(m, freqs, curve, "Hz")


_SENSITIVITY: dict[str, Callable[[CaptureAnalysis, MetricSpec], MetricValue]] = {
    "sweep": _sweep_sensitivity,
    "tone": _tone_sensitivity,
}


def _sensitivity(a: CaptureAnalysis, m: MetricSpec) -> MetricValue:
    return _SENSITIVITY[a.spec.stimulus.kind](a, m)


def _thd(a: CaptureAnalysis, m: MetricSpec) -> MetricValue:
    return _THD[a.spec.stimulus.kind](a, m)


_THD: dict[str, Callable[[CaptureAnalysis, MetricSpec], MetricValue]] = {
    "sweep": _sweep_thd,
    "tone": _tone_thd,
}

# ---------------------------------------------------------------------------------------
# Element tests: piezo.element.bvd (impedance tables), piezo.element.ringdown (taps).


def _impedance(a: CaptureAnalysis) -> Any:
    from piezo.element.bvd import analyse_impedance

    def compute() -> Any:
        if a.capture.sweep is None:
            raise InputError("the capture is not an impedance table")
        low = float(a.spec.stimulus.params.get("low_frequency_hz", 1000.0))
        return analyse_impedance(a.capture.sweep, low_frequency_hz=low)

    return a.cached("impedance", compute)


def _in_band(m: MetricSpec, frequency_hz: float) -> bool:
    band = m.params.get("band_hz")
    return band is None or band[0] <= frequency_hz <= band[1]


def _main_mode(a: CaptureAnalysis, m: MetricSpec) -> Any:
    modes = [x for x in _impedance(a).modes if _in_band(m, x.fs_hz)]
    if not modes:
        raise InputError("no resonance found" + (" in band_hz" if "band_hz" in m.params else ""))
    return max(modes, key=lambda x: x.c1_f)


def _mode_value(
    attr: str, scale: float = 1.0
) -> Callable[[CaptureAnalysis, MetricSpec], MetricValue]:
    def extract(a: CaptureAnalysis, m: MetricSpec) -> MetricValue:
        mode = _main_mode(a, m)
        u = mode.u.get(attr)
        detail = f"u = {u * scale:.3g}" if u is not None else ""
        return MetricValue(
            float(getattr(mode, attr)) * scale,
            detail=detail,
            uncertainty=None if u is None else _finite(u * scale),
        )

    return extract


def _free_capacitance(a: CaptureAnalysis, m: MetricSpec) -> MetricValue:
    r = _impedance(a)
    if r.free_capacitance_f is None:
        return MetricValue(None, reason=f"no capacitance at {r.low_frequency_hz:g} Hz")
    return MetricValue(r.free_capacitance_f * 1e9, detail=str(r.capacitance_source))


def _tan_delta(a: CaptureAnalysis, m: MetricSpec) -> MetricValue:
    r = _impedance(a)
    if r.tan_delta is None:
        return MetricValue(None, reason=f"no loss tangent at {r.low_frequency_hz:g} Hz")
    return MetricValue(r.tan_delta, detail=str(r.capacitance_source))


def _ringdown(a: CaptureAnalysis) -> Any:
    from piezo.element.ringdown import ringdown

    def compute() -> Any:
        cap = a.capture
        threshold = float(a.spec.stimulus.params.get("threshold_db", 20.0))
        return ringdown(cap.samples, cap.sample_rate_hz, threshold_db=threshold)[0]

    return a.cached("ringdown", compute)


def _tap_modes(a: CaptureAnalysis, m: MetricSpec) -> list[Any]:
    r = _ringdown(a)
    if not r.events:
        raise InputError("no tap found in the capture")
    return [x for x in r.modes if _in_band(m, x.frequency_hz)]


def _strongest_tap_mode(a: CaptureAnalysis, m: MetricSpec) -> Any:
    modes = _tap_modes(a, m)
    if not modes:
        raise InputError(
            "no decaying mode found" + (" in band_hz" if "band_hz" in m.params else "")
        )
    return max(modes, key=lambda x: x.amplitude)


def _mode_count(a: CaptureAnalysis, m: MetricSpec) -> MetricValue:
    if a.spec.stimulus.kind == "impedance":
        found = [x.fs_hz for x in _impedance(a).modes if _in_band(m, x.fs_hz)]
    else:
        found = [x.frequency_hz for x in _tap_modes(a, m)]
    return MetricValue(float(len(found)), detail=", ".join(f"{f:.6g} Hz" for f in found))


def _mode_frequency(a: CaptureAnalysis, m: MetricSpec) -> MetricValue:
    mode = _strongest_tap_mode(a, m)
    return MetricValue(
        mode.frequency_hz,
        detail=f"{mode.events} event(s)",
        uncertainty=_mean_uncertainty(mode.frequency_std_hz, mode.events),
    )


def _mode_q(a: CaptureAnalysis, m: MetricSpec) -> MetricValue:
    mode = _strongest_tap_mode(a, m)
    return MetricValue(
        mode.q,
        detail=f"at {mode.frequency_hz:.6g} Hz",
        uncertainty=_mean_uncertainty(mode.q_std, mode.events),
    )


def _finite(u: float | None) -> float | None:
    return float(u) if u is not None and math.isfinite(u) and u >= 0 else None


def _mean_uncertainty(std: float | None, events: int) -> float | None:
    """Type A standard uncertainty of a mean of ``events`` repeats: s / √n (GUM 4.2.3).

    One event gives no spread, hence no uncertainty from repeats.
    """
    if std is None or events < 2:
        return None
    return _finite(std / math.sqrt(events))


#: Metric kind -> extractor.
EXTRACTORS: dict[str, Callable[[CaptureAnalysis, MetricSpec], MetricValue]] = {
    "sensitivity": _sensitivity,
    "corner": _corner,
    "resonance": _resonance,
    "thd": _thd,
    "response_mask": _response_mask,
    "golden_deviation": _golden_deviation,
    "clipping": _clipping,
    "noise_floor": _noise_floor,
    "self_noise": _self_noise,
    "thd_n": _thd_n,
    "tone_frequency": _tone_frequency,
    "band_mask": _band_mask,
    "fs": _mode_value("fs_hz"),
    "fp": _mode_value("fp_hz"),
    "qm": _mode_value("qm"),
    "k_eff": _mode_value("k_eff"),
    "c0": _mode_value("c0_f", 1e9),
    "free_capacitance": _free_capacitance,
    "tan_delta": _tan_delta,
    "mode_count": _mode_count,
    "mode_frequency": _mode_frequency,
    "mode_q": _mode_q,
}


def report_data(a: CaptureAnalysis) -> dict[str, Any]:
    """Curves for a capture's report, from the analyses already run (nothing is
    computed again): the swept response on a 1/12-octave grid when there is one.

    Examples
    --------
    Nothing before an extractor ran the swept response; its curve afterwards:

    >>> from piezo.batch.capture import CaptureAnalysis, load_capture
    >>> from piezo.batch.spec import load_spec
    >>> spec = load_spec("recordings/pd27-spec.toml")
    >>> cap = load_capture("recordings/pd27-lot/PD27-24101.flac", spec)
    >>> a = CaptureAnalysis(cap, spec)
    >>> report_data(a)
    {}
    >>> corner = EXTRACTORS["corner"](a, spec.metrics[1])
    >>> curve = report_data(a)["response"]
    >>> curve["unit"], 1000.0 in curve["frequency_hz"]
    ('dB re 1 V/Pa', True)
    """
    out: dict[str, Any] = {}
    found, response = a.peek("sweep_response")
    if found:
        table = response.to_table(points_per_octave=12)
        out["response"] = {
            "frequency_hz": [float(v) for v in table.frequency_hz],
            "magnitude_db": [float(v) for v in table.magnitude_db],
            "unit": table.magnitude_unit,
        }
    return out
