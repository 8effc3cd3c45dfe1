"""Reverberation time per band from impulse responses and sweeps (ISO 18233, ISO 3382-2).

Pipeline for an impulse response: find its start (ISO 3382-1 convention), band-filter it
time-reversed, then build and fit its decay curve (:mod:`fieldtl.analysis.edc`: Lundeby noise
floor, Schroeder integration, least-squares EDT, T20 and T30). This module turns the fitted
lines into results with their quality findings (range above noise, ξ, curvature, B·T) and
averages decays. Interrupted-noise recordings produce the same :class:`DecayCurve` in
:mod:`fieldtl.analysis.interrupted`, so evaluation, findings and averaging are shared. Quality
problems are findings; only unusable input raises InputError.
"""

from __future__ import annotations

import dataclasses
from collections.abc import Sequence
from dataclasses import dataclass
from typing import Literal

import numpy as np
from scipy import signal

from fieldtl.analysis.edc import (EVALUATION_RANGES_DB, DecayCurve, DecayLine, NoiseHandling, Parameter,
                                  fit_decay_line, impulse_start_index, integrated_decay_curve, without_trailing_padding)
from fieldtl.analysis.filterbank import band_sos, decay_stage, halved
from fieldtl.analysis.lundeby import estimate_noise_floor, smoothing_window_s
from fieldtl.audio.signals import SweepSpec, checked_audio, impulse_response_from_sweep
from fieldtl.bands import (OCTAVES_125_2000_HZ, THIRD_OCTAVES_100_3150_HZ, BandSpectrum, Fraction,
                           band_edges_hz, band_index)
from fieldtl.errors import InputError
from fieldtl.findings import Finding

Method = Literal["impulse_response", "sweep", "interrupted_noise", "average"]
Averaging = Literal["single", "ensemble", "arithmetic"]

RANGE_ABOVE_NOISE_DB = 10.0        # bottom of the range >= 10 dB above the noise (ISO 3382-2, from memory)
NONLINEARITY_LIMIT_PERMILLE = 10.0  # ξ above 10 ‰ is suspicious (ISO 3382-2 Annex B, from memory)
CURVATURE_LIMIT_PERCENT = 10.0     # C above 10 % is suspicious (ISO 3382-2 Annex B, from memory)
BT_MIN_TIME_REVERSED = 4.0         # B·T > 4 with time-reversed filtering (ISO 3382-2, from memory)
BT_MIN_FORWARD = 16.0              # B·T > 16 with forward filtering (ISO 3382-2, from memory)
MIN_IMPULSE_RESPONSE_S = 0.1
# Findings citing these clauses are marked unconfirmed (Finding.unconfirmed): both are from memory.
CLAUSE_RANGE = "ISO 3382-2: bottom of the evaluation range at least 10 dB above the noise"
CLAUSE_ANNEX_B = "ISO 3382-2 Annex B"


@dataclass(frozen=True, slots=True)
class BandDecay:
    """EDT, T20 and T30 of one band, with the evidence behind them and the findings about them."""

    nominal_hz: float
    fraction: Fraction
    edt: DecayLine | None           # None where not valid (see findings)
    t20: DecayLine | None
    t30: DecayLine | None
    dynamic_range_db: float | None  # None when no decay could be extracted
    curvature_percent: float | None  # C = 100 (T30/T20 - 1)
    bt_product: float | None        # bandwidth times the shorter valid of T20, T30
    bt_limit: float                 # the B·T it must exceed: 4 (time-reversed filtering) or 16 (forward)
    findings: tuple[Finding, ...]
    curve: DecayCurve | None        # the decay evaluated; None for arithmetic averages

    @property
    def edt_s(self) -> float | None:
        return None if self.edt is None else self.edt.reverberation_time_s

    @property
    def t20_s(self) -> float | None:
        return None if self.t20 is None else self.t20.reverberation_time_s

    @property
    def t30_s(self) -> float | None:
        return None if self.t30 is None else self.t30.reverberation_time_s

    @property
    def xi_permille(self) -> float | None:
        """ξ of the T30 fit, else of the T20 fit."""
        line = self.t30 or self.t20
        return None if line is None else line.nonlinearity_permille

    def line(self, parameter: Parameter) -> DecayLine | None:
        return {"EDT": self.edt, "T20": self.t20, "T30": self.t30}[parameter]


@dataclass(frozen=True, slots=True)
class DecayAnalysis:
    """Reverberation results of one take (or an average of takes), band by band."""

    source_name: str
    method: Method
    averaging: Averaging            # "single" decay, "ensemble"-averaged decays, or "arithmetic" mean of T
    decay_count: int                # decays behind the result, counting takes that gave none (see findings)
    bands: tuple[BandDecay, ...]
    findings: tuple[Finding, ...]   # about the take as a whole (band findings live in the bands)

    @property
    def nominal_hz(self) -> tuple[float, ...]:
        return tuple(band.nominal_hz for band in self.bands)

    def band(self, nominal_hz: float) -> BandDecay:
        for band in self.bands:
            if band.nominal_hz == float(nominal_hz):
                return band
        raise InputError(f"{self.source_name}: no {nominal_hz:g} Hz band in the decay analysis")

    def spectrum(self, parameter: Parameter = "T20") -> BandSpectrum:
        """One parameter as a band spectrum in seconds (None where not valid)."""
        values = tuple(band.line(parameter) for band in self.bands)
        return BandSpectrum(self.nominal_hz, tuple(None if v is None else v.reverberation_time_s for v in values),
                            "s", parameter, self.bands[0].fraction if self.bands else 3)

    def all_findings(self) -> tuple[Finding, ...]:
        return self.findings + tuple(f for band in self.bands for f in band.findings)


def reverberation_from_impulse_response(
        impulse_response: np.ndarray, *, sample_rate_hz: float, nominal_hz: Sequence[float] | None = None,
        fraction: Fraction = 3, noise_handling: NoiseHandling = "subtract",
        source_name: str = "impulse response") -> DecayAnalysis:
    """EDT, T20, T30 per band from one impulse response (ISO 18233 integrated impulse response).

    Bands default to 100-3150 Hz one-third octaves (125-2000 Hz octaves for ``fraction=1``).
    ``noise_handling``: "truncate" integrates up to Lundeby's crossing point and adds the tail
    P·T_late / (6 ln 10); "subtract" also subtracts the noise power first (Chu); "none" integrates
    to the end (noise-free or simulated responses). Does not average; see average_reverberation.
    """
    return _from_impulse_response(impulse_response, sample_rate_hz=sample_rate_hz, nominal_hz=nominal_hz,
                                  fraction=fraction, noise_handling=noise_handling, source_name=source_name,
                                  method="impulse_response")


def reverberation_from_sweep(
        recording: np.ndarray, played: SweepSpec | np.ndarray, *, sample_rate_hz: float,
        nominal_hz: Sequence[float] | None = None, fraction: Fraction = 3,
        noise_handling: NoiseHandling = "subtract", source_name: str = "sweep recording") -> DecayAnalysis:
    """As :func:`reverberation_from_impulse_response`, for a recorded exponential sweep.

    ``played`` names the sweep that was played: its :class:`SweepSpec`, or its samples (see
    :func:`fieldtl.audio.signals.impulse_response_from_sweep`).
    """
    impulse_response = impulse_response_from_sweep(recording, played, sample_rate_hz=sample_rate_hz,
                                                   source_name=source_name)
    return _from_impulse_response(impulse_response, sample_rate_hz=sample_rate_hz, nominal_hz=nominal_hz,
                                  fraction=fraction, noise_handling=noise_handling, source_name=source_name,
                                  method="sweep")


def _from_impulse_response(impulse_response: np.ndarray, *, sample_rate_hz: float,
                           nominal_hz: Sequence[float] | None, fraction: Fraction,
                           noise_handling: NoiseHandling, source_name: str, method: Method) -> DecayAnalysis:
    return decay_band_sets(impulse_response, sample_rate_hz=sample_rate_hz, band_sets=((nominal_hz, fraction),),
                           noise_handling=noise_handling, source_name=source_name, method=method)[0]


def decay_band_sets(impulse_response: np.ndarray, *, sample_rate_hz: float,
                    band_sets: Sequence[tuple[Sequence[float] | None, Fraction]], noise_handling: NoiseHandling = "subtract",
                    source_name: str = "impulse response", method: Method = "impulse_response") -> tuple[DecayAnalysis, ...]:
    """One analysis per set of bands (say one-third octaves and an octave) of one impulse response, as
    :func:`reverberation_from_impulse_response` gives each, with the start found, the response reversed
    and decimated once for all of them."""
    response = checked_audio(impulse_response, sample_rate_hz=sample_rate_hz, source_name=source_name,
                             min_duration_s=MIN_IMPULSE_RESPONSE_S)
    sets = [(analysis_bands(nominal_hz, fraction=fraction, sample_rate_hz=sample_rate_hz, source_name=source_name),
             fraction) for nominal_hz, fraction in band_sets]
    if noise_handling not in ("subtract", "truncate", "none"):
        raise InputError(f"{source_name}: noise handling must be 'subtract', 'truncate' or 'none', "
                         f"got {noise_handling!r}")
    if not np.any(response):
        raise InputError(f"{source_name}: all samples are zero")
    response = without_trailing_padding(response)
    start = impulse_start_index(response)
    if start is None:
        finding = Finding("impulse_start_not_found", "error",
                          f"{source_name}: the response never rises 20 dB above its own tail, so its start "
                          "cannot be found", "check the recording chain and the level, then measure again",
                          clause="ISO 3382-1: start 20 dB below the peak", unconfirmed=True)   # from memory
        return tuple(DecayAnalysis(source_name, method, "single", 1,
                                   tuple(band_without_decay(f, fraction, None, ()) for f in bands_hz), (finding,))
                     for bands_hz, fraction in sets)
    # Time-reversed filtering: filter the reversed response, reverse back (ISO 3382-2, from memory).
    # Each band runs at the lowest rate decay_stage allows, low-passed and decimated in reversed time.
    reversed_at_stage = [np.ascontiguousarray(response[start:][::-1])]
    analyses = []
    for bands_hz, fraction in sets:
        bands = []
        for f in bands_hz:
            stage = decay_stage(f, fraction=fraction, sample_rate_hz=sample_rate_hz)
            while len(reversed_at_stage) <= stage:
                reversed_at_stage.append(halved(reversed_at_stage[-1]))
            bands.append(_impulse_band(reversed_at_stage[stage], f, fraction=fraction,
                                       sample_rate_hz=sample_rate_hz / 2**stage, decimation=2**stage,
                                       noise_handling=noise_handling, source_name=source_name))
        analyses.append(DecayAnalysis(source_name, method, "single", 1, tuple(bands), ()))
    return tuple(analyses)


def _impulse_band(reversed_response: np.ndarray, nominal_hz: float, *, fraction: Fraction, sample_rate_hz: float,
                  decimation: int, noise_handling: NoiseHandling, source_name: str) -> BandDecay:
    sos = band_sos(nominal_hz, sample_rate_hz=sample_rate_hz, fraction=fraction)
    band_response = signal.sosfilt(sos, reversed_response)[::-1]
    if not np.any(band_response):
        return band_without_decay(nominal_hz, fraction, None, (_no_decay_finding(source_name, nominal_hz, None),))
    curve = integrated_decay_curve(band_response, nominal_hz=nominal_hz, fraction=fraction,
                                   sample_rate_hz=sample_rate_hz, noise_handling=noise_handling)
    if curve is not None and decimation > 1:     # initial energy as a sum over the full rate's samples
        curve = dataclasses.replace(curve, initial_energy=curve.initial_energy * decimation)
    if curve is None:
        peak_to_noise_db = estimate_noise_floor(band_response ** 2, sample_rate_hz=sample_rate_hz,
                                                window_s=smoothing_window_s(nominal_hz)).peak_to_noise_db
        return band_without_decay(nominal_hz, fraction, peak_to_noise_db,
                                  (_no_decay_finding(source_name, nominal_hz, peak_to_noise_db),))
    return evaluate_curve(curve, source_name=source_name)


def evaluate_curve(curve: DecayCurve, *, source_name: str = "decay") -> BandDecay:
    """EDT, T20, T30, ξ, curvature, B·T and findings of one band's decay curve.

    A parameter is evaluated only if the dynamic range reaches 10 dB below the bottom of its
    range (EDT 20 dB, T20 35 dB, T30 45 dB) and the curve itself gets there. EDT is evaluated on
    integrated impulse responses only (ISO 3382-1, from memory): an interrupted-noise decay starts
    from a randomly fluctuating level, so its EDT stays None, without a finding.
    """
    time_s, level_db = curve.time_s(), np.asarray(curve.level_db)
    lines: dict[Parameter, DecayLine | None] = {}
    for parameter, (top_db, bottom_db) in EVALUATION_RANGES_DB.items():
        if parameter == "EDT" and curve.kind == "interrupted_noise":
            continue
        enough_range = curve.dynamic_range_db >= -bottom_db + RANGE_ABOVE_NOISE_DB
        lines[parameter] = (fit_decay_line(time_s, level_db, top_db=top_db, bottom_db=bottom_db)
                            if enough_range else None)
    bt_limit = BT_MIN_TIME_REVERSED if curve.kind == "integrated_impulse_response" else BT_MIN_FORWARD
    return _band_result(curve.nominal_hz, curve.fraction, lines, curve.dynamic_range_db, bt_limit, curve,
                        source_name=source_name)


def _band_result(nominal_hz: float, fraction: Fraction, lines: dict[Parameter, DecayLine | None],
                 dynamic_range_db: float | None, bt_limit: float, curve: DecayCurve | None, *, source_name: str,
                 extra: tuple[Finding, ...] = ()) -> BandDecay:
    """Derived quantities and the quality findings shared by single and averaged decays."""
    t20, t30 = lines.get("T20"), lines.get("T30")
    curvature = (100.0 * (t30.reverberation_time_s / t20.reverberation_time_s - 1.0)
                 if t20 is not None and t30 is not None else None)   # C (ISO 3382-2 Annex B, from memory)
    valid_t = [line.reverberation_time_s for line in (t20, t30) if line is not None]
    low_hz, high_hz = band_edges_hz(nominal_hz, fraction=fraction)
    bt_product = (high_hz - low_hz) * min(valid_t) if valid_t else None
    where = f"{source_name}, {nominal_hz:g} Hz"
    findings = list(extra)
    missing = [p for p, line in lines.items() if line is None]
    if missing:
        needs = ", ".join(f"{p} needs {-EVALUATION_RANGES_DB[p][1] + RANGE_ABOVE_NOISE_DB:.0f} dB" for p in missing)
        stands = "an unknown range" if dynamic_range_db is None else f"{dynamic_range_db:.1f} dB"
        findings.append(Finding(
            "decay_range_short", "warning",
            f"{where}: {' and '.join(missing)} not evaluated: the decay stands {stands} above "
            f"the noise or ends early ({needs})",
            "raise the signal level, lower the background noise or record longer after the signal stops",
            nominal_hz, CLAUSE_RANGE, unconfirmed=True))
    nonlinear = [(p, line.nonlinearity_permille) for p, line in lines.items()
                 if p != "EDT" and line is not None and line.nonlinearity_permille > NONLINEARITY_LIMIT_PERMILLE]
    if nonlinear:
        values = ", ".join(f"{p} ξ = {xi:.0f} ‰" for p, xi in nonlinear)
        findings.append(Finding(
            "decay_nonlinear", "warning",
            f"{where}: the decay is not a straight line ({values}; above {NONLINEARITY_LIMIT_PERMILLE:.0f} ‰)",
            "look at the decay curve for a double slope or noise bursts and repeat the measurement",
            nominal_hz, CLAUSE_ANNEX_B, unconfirmed=True))
    if curvature is not None and curvature > CURVATURE_LIMIT_PERCENT:
        findings.append(Finding(
            "decay_curved", "warning",
            f"{where}: T30 is {curvature:.0f} % longer than T20 (curvature above {CURVATURE_LIMIT_PERCENT:.0f} %)",
            "the room may have a double-slope decay (coupled spaces, uneven absorption); report T20 and T30",
            nominal_hz, CLAUSE_ANNEX_B, unconfirmed=True))
    if bt_product is not None and bt_product < bt_limit:
        how = "time-reversed" if bt_limit == BT_MIN_TIME_REVERSED else "forward"
        findings.append(Finding(
            "bt_too_small", "warning",
            f"{where}: B·T = {bt_product:.1f}, below {bt_limit:.0f} for {how} filtering: the band filter's own "
            "ringing lengthens the measured decay",
            "use the octave band or an impulse-response method with time-reversed filtering",
            nominal_hz, "ISO 3382-2: B·T > 16, or > 4 with time-reversed filtering", unconfirmed=True))   # from memory
    return BandDecay(nominal_hz, fraction, lines.get("EDT"), t20, t30, dynamic_range_db, curvature, bt_product,
                     bt_limit, tuple(findings), curve)


def band_without_decay(nominal_hz: float, fraction: Fraction, dynamic_range_db: float | None,
                       findings: tuple[Finding, ...], *, bt_limit: float = BT_MIN_TIME_REVERSED) -> BandDecay:
    """A band in which no decay could be extracted: every result None, the reason in ``findings``."""
    return BandDecay(nominal_hz, fraction, None, None, None, dynamic_range_db, None, None, bt_limit, findings, None)


def _no_decay_finding(source_name: str, nominal_hz: float, peak_to_noise_db: float | None) -> Finding:
    level = "" if peak_to_noise_db is None else f" (peak {peak_to_noise_db:.1f} dB above the noise)"
    return Finding("decay_range_short", "warning",
                   f"{source_name}, {nominal_hz:g} Hz: no decay of 10 dB or more above the noise{level}; "
                   "EDT, T20 and T30 not evaluated",
                   "raise the signal level or lower the background noise and measure again",
                   nominal_hz, CLAUSE_RANGE, unconfirmed=True)


def analysis_bands(nominal_hz: Sequence[float] | None, *, fraction: Fraction, sample_rate_hz: float,
                   source_name: str) -> tuple[float, ...]:
    """The bands to analyse (defaults per ``fraction``), validated as nominal and below Nyquist."""
    if fraction not in (1, 3):
        raise InputError(f"{source_name}: fraction must be 1 (octaves) or 3 (one-third octaves), got {fraction!r}")
    bands = tuple(float(f) for f in (nominal_hz if nominal_hz is not None else
                                     THIRD_OCTAVES_100_3150_HZ if fraction == 3 else OCTAVES_125_2000_HZ))
    if not bands:
        raise InputError(f"{source_name}: no bands to analyse")
    for f in bands:
        band_index(f, fraction=fraction)
        if band_edges_hz(f, fraction=fraction)[1] >= sample_rate_hz / 2:
            raise InputError(f"{source_name}: the {f:g} Hz band needs a sample rate above "
                             f"{2 * band_edges_hz(f, fraction=fraction)[1]:.0f} Hz, got {sample_rate_hz:g} Hz")
    if any(b <= a for a, b in zip(bands, bands[1:])):
        raise InputError(f"{source_name}: bands must be strictly ascending")
    return bands


def average_reverberation(analyses: Sequence[DecayAnalysis], *,
                          method: Literal["arithmetic", "ensemble"] = "arithmetic") -> DecayAnalysis:
    """Combine several decays of one room, band by band (ISO 3382-2 spatial averaging, from memory).

    "arithmetic": mean of each parameter over the decays where it is valid; the returned lines
    carry the mean T, the mean range used and the largest ξ, and no curve. "ensemble": the decay
    curves are averaged as energies, weighted by their initial energies (the ensemble average of
    the squared responses), over their common length, and the average is evaluated like a
    single decay. The result's ``averaging`` says which was used.
    """
    if method not in ("arithmetic", "ensemble"):
        raise InputError(f"averaging method must be 'arithmetic' or 'ensemble', got {method!r}")
    if not analyses:
        raise InputError("no decays to average")
    first = analyses[0]
    for other in analyses[1:]:
        if other.nominal_hz != first.nominal_hz or (other.bands and other.bands[0].fraction != first.bands[0].fraction):
            raise InputError(f"{other.source_name}: bands differ from those of {first.source_name}; "
                             "analyse every decay in the same bands")
    source_name = "; ".join(a.source_name for a in analyses)
    band_sets = list(zip(*(a.bands for a in analyses)))
    combine = _ensemble_band if method == "ensemble" else _arithmetic_band
    bands = tuple(combine(list(decays), source_name=source_name) for decays in band_sets)
    return DecayAnalysis(source_name, "average", method, sum(a.decay_count for a in analyses), bands,
                         tuple(f for a in analyses for f in a.findings))


def _arithmetic_band(decays: list[BandDecay], *, source_name: str) -> BandDecay:
    nominal_hz, fraction = decays[0].nominal_hz, decays[0].fraction
    lines: dict[Parameter, DecayLine | None] = {}
    extra = []
    # EDT only when every decay is an integrated impulse response (time-reversed filtering, limit 4).
    evaluated = [p for p in EVALUATION_RANGES_DB
                 if p != "EDT" or all(d.bt_limit == BT_MIN_TIME_REVERSED for d in decays)]
    for parameter in evaluated:
        valid = [line for d in decays if (line := d.line(parameter)) is not None]
        lines[parameter] = DecayLine(*(float(np.mean([getattr(v, k) for v in valid])) for k in (
            "reverberation_time_s", "top_db", "bottom_db", "start_s", "stop_s")),
            nonlinearity_permille=max(v.nonlinearity_permille for v in valid)) if valid else None
        if valid and len(valid) < len(decays):
            extra.append(Finding("decays_excluded", "info",
                                 f"{source_name}, {nominal_hz:g} Hz: {parameter} is the mean of {len(valid)} of "
                                 f"{len(decays)} decays; the others had no valid {parameter}",
                                 "", nominal_hz, "ISO 3382-2: arithmetic mean of the decays",   # from memory
                                 unconfirmed=True))
    ranges = [d.dynamic_range_db for d in decays if d.dynamic_range_db is not None]
    return _band_result(nominal_hz, fraction, lines, min(ranges) if ranges else None, max(d.bt_limit for d in decays),
                        None, source_name=source_name, extra=tuple(extra))


def _ensemble_band(decays: list[BandDecay], *, source_name: str) -> BandDecay:
    nominal_hz, fraction = decays[0].nominal_hz, decays[0].fraction
    curves = [d.curve for d in decays if d.curve is not None]
    if not curves:
        return band_without_decay(nominal_hz, fraction, None,
                                   (_no_decay_finding(source_name, nominal_hz, None),))
    if len({c.step_s for c in curves}) > 1 or len({c.kind for c in curves}) > 1:
        raise InputError(f"{source_name}: only decays of one kind (impulse response or interrupted noise) at one "
                         "sample rate can be ensemble-averaged; use the arithmetic mean")
    length = min(len(c.level_db) for c in curves)
    # Weighted by their initial energies: the ensemble average of the squared responses or
    # decays themselves. Equal weights (each curve divided by its own random start) would
    # lengthen T where single decays fluctuate strongly (computed: +2 % at 50 Hz, T = 1 s).
    weights = np.array([c.initial_energy for c in curves]) / sum(c.initial_energy for c in curves)
    energy = weights @ np.array([10.0 ** (np.asarray(c.level_db[:length]) / 10.0) for c in curves])
    noise = float(weights @ np.array([10.0 ** (-c.dynamic_range_db / 10.0) for c in curves]))
    curve = DecayCurve(nominal_hz, fraction, curves[0].step_s, tuple((10.0 * np.log10(energy)).tolist()),
                       float(-10.0 * np.log10(noise)), curves[0].kind,
                       float(np.mean([c.initial_energy for c in curves])))
    band = evaluate_curve(curve, source_name=source_name)
    if len(curves) < len(decays):
        excluded = Finding("decays_excluded", "info",
                           f"{source_name}, {nominal_hz:g} Hz: {len(decays) - len(curves)} of {len(decays)} decays "
                           "had no usable decay curve and were left out of the ensemble average",
                           "", nominal_hz, "ISO 3382-2: ensemble average of the decays",   # from memory
                           unconfirmed=True)
        return dataclasses.replace(band, findings=(excluded, *band.findings))
    return band
