"""Write the INVENTED demo airborne test: recordings, survey file and the truth they were built from.

Everything here is made up: the building (Brackenfold House does not exist), the rooms, the
wall, its apparent sound reduction index, the loudspeaker spectrum, the background noise and
the reverberation times. The recordings are synthesised from those numbers, so the truth is
known exactly and is written to expected.json for end-to-end tests.

Run from anywhere: ``python sample_audio/make_demo.py [OUT_DIR]`` (default: this folder).
Deterministic (fixed seeds): running it again rewrites the same samples.

Arithmetic of the invented truth (ISO 16283-1, formulas as in the project's facts sheet 1.1,
from memory): A = 0.16 V / T, D = R' - 10 lg(S / A), L2 = L1 - D, DnT = D + 10 lg(T / 0.5),
Dn = D - 10 lg(A / 10). Background rule for the "by_background_rule" values: facts sheet 1.8.
"""

from __future__ import annotations

import json
import sys
from pathlib import Path

import numpy as np
import soundfile
from scipy import signal

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))  # run from a checkout without installing

from fieldtl.audio.synthesis import calibrator_tone, noise_with_band_levels  # noqa: E402
from fieldtl.bands import THIRD_OCTAVES_50_5000_HZ, BandSpectrum, band_edges_hz  # noqa: E402
from fieldtl.errors import InputError  # noqa: E402
from fieldtl.rating.iso717 import rate_iso717_1  # noqa: E402

OUT_DIR = Path(__file__).resolve().parent
BANDS_HZ = THIRD_OCTAVES_50_5000_HZ
SAMPLE_RATE_HZ = 48_000
BASE_SEED = 20_240_611

# Invented measuring chain: a digital RMS of 1.0 (full-scale RMS) is 125 dB re 20 µPa. The loud
# source room (about 108 dB overall, Gaussian peaks 14-15 dB above RMS) fits below full scale.
FULL_SCALE_DB = 125.0
CALIBRATOR_DB = 94.0
CALIBRATION_DRIFT_DB = 0.1  # the chain reads the calibrator 0.1 dB lower at the end of the series
LSB = 2.0**-15  # 16-bit step on the +-1 scale
# Rounding a signal many steps wide to 16 bits adds white noise of mean square LSB^2 / 12
# (uniform quantisation error, a textbook result); it is part of every recording below.
QUANTISATION_MS_PER_HZ = LSB**2 / 12.0 / (SAMPLE_RATE_HZ / 2)

TAKE_S = 6.0  # fixed microphone positions: at least 6 s for bands >= 100 Hz (ISO 16283-1, from memory)
# The 50-80 Hz bands would need 15 s per position (ISO 16283-1, from memory); the demo keeps 6 s
# to stay small, so its 50-80 Hz values are illustrative. A real survey records 15 s per position.
CALIBRATION_S = 5.0
DECAY_S = 1.8
DECAY_ONSET_S = 0.1
DECAY_PEAK_TO_NOISE_DB = 55.0  # enough for T30 (45 dB) with room to spare (ISO 3382-2, from memory)
DECAY_PEAK_DBFS = -6.0
# The one deliberately weak take: traffic rumble during this decay leaves only WEAK_DECAY_RANGE_DB
# of decay above the noise in the 50 and 63 Hz bands, less than T20 needs (35 dB), so those two
# bands of this take get a finding, and the other five decays carry the room's T there.
WEAK_DECAY = (2, 3)
WEAK_DECAY_BANDS_HZ = (50.0, 63.0)
WEAK_DECAY_RANGE_DB = 28.0
SPEAKERS = (1, 2)
MICROPHONES = (1, 2, 3, 4, 5)
BACKGROUND_POSITIONS = (1, 2, 3)
DECAYS = ((1, 1), (1, 2), (1, 3), (2, 1), (2, 2), (2, 3))  # (loudspeaker, microphone)

TITLE = ("INVENTED DEMO: Brackenfold House (a fictional building), flat 2 living room to flat 3 bedroom, "
         "separating wall")
CONSTRUCTION = ("Invented: 215 mm dense concrete blockwork, 13 mm plaster both sides, about 440 kg/m2; "
                "flanking through a continuous lightweight inner leaf")
REQUIREMENT = "DnT,w + Ctr >= 45"  # an example requirement, not a claim about any regulation
# The declared build-up in fieldtl's construction format, for the construction check (invented).
WALL_TOML = """# INVENTED demo wall (sample_audio/make_demo.py): the declared build-up of the separating wall.
name = "Invented: 215 mm dense concrete blockwork, 13 mm gypsum plaster both sides"

[[leaf]]
layers = ["plaster_gypsum:13", "concrete_block_dense:215", "plaster_gypsum:13"]
"""
SOURCE_VOLUME_M3 = 48.0
RECEIVING_VOLUME_M3 = 38.0
SEPARATING_AREA_M2 = 11.5

# Invented spectra, one value per one-third octave: 50-500 Hz on the first line, 630-5000 Hz on the second.
R_PRIME_DB = ( 35.0,  33.5,  36.0,  38.5,  39.0,  40.5,  42.5,  44.5,  46.5,  48.0,  50.0,
               52.0,  53.5,  55.0,  56.5,  57.5,  58.5,  59.5,  60.5,  62.0,  63.5)
SOURCE_DB = ( 92.0,  95.0,  97.0,  98.0,  98.0,  97.5,  97.0,  96.5,  96.0,  95.5,  95.0,
              94.5,  94.0,  93.5,  93.0,  92.5,  92.0,  91.5,  91.0,  90.5,  90.0)
BACKGROUND_DB = ( 35.0,  33.0,  31.0,  29.0,  27.0,  26.0,  25.0,  24.0,  23.0,  22.0,  21.0,
                  20.5,  20.0,  20.0,  20.0,  20.0,  20.5,  21.0,  21.5,  22.0,  22.5)
REVERBERATION_S = ( 0.80,  0.78,  0.74,  0.70,  0.66,  0.62,  0.60,  0.58,  0.57,  0.56,  0.55,
                    0.55,  0.54,  0.53,  0.52,  0.50,  0.48,  0.46,  0.44,  0.42,  0.40)
# Spread of levels between microphone positions (standard deviation, dB; invented, larger in the
# modal low-frequency range). Offsets are normalised so their energy mean is exactly 0 dB.
POSITION_SPREAD_DB = (2.0, 2.0, 2.0, 1.5, 1.5, 1.5, 1.0, 1.0, 1.0, 1.0,
                      0.7, 0.7, 0.7, 0.7, 0.7, 0.7, 0.7, 0.7, 0.7, 0.7, 0.7)
BACKGROUND_SPREAD_DB = 1.0

REFERENCE_TIME_S = 0.5   # T0 (ISO 16283-1, from memory)
REFERENCE_AREA_M2 = 10.0  # A0 (ISO 16283-1, from memory)


def energy_sum_db(*levels_db: np.ndarray) -> np.ndarray:
    return 10.0 * np.log10(sum(10.0 ** (np.asarray(level) / 10.0) for level in levels_db))


def quantisation_floor_db() -> np.ndarray:
    """Band levels of the 16-bit rounding noise, dB re 20 µPa on the demo's calibration."""
    widths_hz = np.array([high - low for low, high in (band_edges_hz(f) for f in BANDS_HZ)])
    return 10.0 * np.log10(QUANTISATION_MS_PER_HZ * widths_hz) + FULL_SCALE_DB


def position_offsets_db(rng: np.random.Generator, count: int, spread_db: np.ndarray) -> np.ndarray:
    """Random level offsets per position and band whose energy mean over positions is 0 dB."""
    offsets = rng.normal(0.0, 1.0, (count, len(BANDS_HZ))) * spread_db
    return offsets - 10.0 * np.log10(np.mean(10.0 ** (offsets / 10.0), axis=0))


def background_rule(signal_db: np.ndarray, background_db: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """ISO 16283-1 background correction (facts sheet 1.8): margin >= 10 dB none; 6-10 dB energy
    subtraction; <= 6 dB subtract 1.3 dB and mark the band as a limit."""
    margin = signal_db - background_db
    subtracted = 10.0 * np.log10(np.maximum(10.0 ** (signal_db / 10.0) - 10.0 ** (background_db / 10.0), 1e-30))
    limited = margin <= 6.0
    return np.where(margin >= 10.0, signal_db, np.where(limited, signal_db - 1.3, subtracted)), limited


def write_pcm16_flac(path: Path, samples: np.ndarray) -> None:
    """Round to 16-bit integers and write FLAC; refuses to clip."""
    steps = np.round(samples / LSB)
    if steps.max() > 32767 or steps.min() < -32768:
        raise InputError(f"{path.name}: would clip at 16 bits; raise FULL_SCALE_DB or lower the levels")
    soundfile.write(str(path), steps.astype(np.int16), SAMPLE_RATE_HZ, format="FLAC", subtype="PCM_16")


def spectrum(values, unit: str, quantity: str) -> BandSpectrum:
    return BandSpectrum.from_array(BANDS_HZ, values, unit, quantity)  # type: ignore[arg-type]


def rating_summary(values_db: np.ndarray, quantity: str, limited: np.ndarray | None = None) -> dict:
    rating = rate_iso717_1(spectrum(values_db, "dB", quantity), limited=None if limited is None else list(limited))
    return {"descriptor": rating.descriptor, "single_number_db": rating.single_number_db,
            "single_number_precise_db": rating.single_number_precise_db,
            "adaptation_terms_db": dict(rating.adaptation_terms_db), "bound": rating.bound}


def plain_t20_s(response: np.ndarray, nominal_hz: float, band_time_s: float) -> float:
    """T20 by plain scipy: 3rd-order Butterworth band-pass run time-reversed, Schroeder curve up to
    where the known decay is 45 dB down (10 dB above the floor), least squares over -5..-25 dB."""
    sos = signal.butter(3, band_edges_hz(nominal_hz), btype="bandpass", fs=SAMPLE_RATE_HZ, output="sos")
    start = round(DECAY_ONSET_S * SAMPLE_RATE_HZ)
    stop = start + round(45.0 / 60.0 * band_time_s * SAMPLE_RATE_HZ)
    energy = signal.sosfilt(sos, response[::-1])[::-1][start:stop] ** 2
    edc = np.cumsum(energy[::-1])[::-1]
    level_db = 10.0 * np.log10(edc / edc[0])
    time_s = np.arange(level_db.size) / SAMPLE_RATE_HZ
    fit = (level_db <= -5.0) & (level_db >= -25.0)
    return float(-60.0 / np.polyfit(time_s[fit], level_db[fit], 1)[0])


def ringing_decay(reverberation_s: np.ndarray, *, seed: int, rumble: bool = False) -> np.ndarray:
    """An invented impulse response whose decay is one straight line per band (ISO 3382-2 linear).

    Each one-third-octave band rings as one damped resonance at its centre frequency, random phase,
    energy falling 60 dB in the band's T; all bands start at the same level. A steady white noise
    floor sits DECAY_PEAK_TO_NOISE_DB below the start in the widest band (more below in the narrow
    ones). With ``rumble`` a low-frequency noise leaves only WEAK_DECAY_RANGE_DB above it in
    WEAK_DECAY_BANDS_HZ. This is a simplification (a real room has many modes per band); a
    well-measured room gives decays as straight as these once averaged, and the check of
    straightness then has nothing to say, which is what the demo should show.
    """
    rng = np.random.default_rng(seed)
    n_samples = round(DECAY_S * SAMPLE_RATE_HZ)
    time_s = np.arange(n_samples) / SAMPLE_RATE_HZ - DECAY_ONSET_S
    ringing = np.maximum(time_s, 0.0)
    response = np.zeros(n_samples)
    for nominal_hz, band_time_s in zip(BANDS_HZ, reverberation_s):
        envelope = np.where(time_s >= 0.0, np.exp(-3.0 * np.log(10.0) * ringing / band_time_s), 0.0)
        response += envelope * np.sin(2.0 * np.pi * nominal_hz * ringing + rng.uniform(0.0, 2.0 * np.pi))
    start_ms = 0.5                                      # mean square of one band's unit sine at the start
    widest_hz = np.diff(band_edges_hz(BANDS_HZ[-1]))[0]
    floor_ms = start_ms * 10.0 ** (-DECAY_PEAK_TO_NOISE_DB / 10.0) * (SAMPLE_RATE_HZ / 2) / widest_hz
    response += rng.normal(0.0, np.sqrt(floor_ms), n_samples)
    if rumble:
        low, high = band_edges_hz(WEAK_DECAY_BANDS_HZ[0])[0], band_edges_hz(WEAK_DECAY_BANDS_HZ[-1])[1]
        spectrum_ = np.fft.rfft(rng.normal(0.0, 1.0, n_samples))      # rumble only inside these bands
        frequency_hz = np.fft.rfftfreq(n_samples, d=1.0 / SAMPLE_RATE_HZ)
        rumble_noise = np.fft.irfft(np.where((frequency_hz >= low) & (frequency_hz <= high), spectrum_, 0.0),
                                    n=n_samples)
        per_band_ms = np.mean(rumble_noise**2) / len(WEAK_DECAY_BANDS_HZ)
        response += rumble_noise * np.sqrt(start_ms * 10.0 ** (-WEAK_DECAY_RANGE_DB / 10.0) / per_band_ms)
    return response * 10.0 ** (DECAY_PEAK_DBFS / 20.0) / np.max(np.abs(response))


def main(out_dir: Path = OUT_DIR) -> None:
    """Write the recordings, survey.toml and expected.json into ``out_dir``."""
    rng = np.random.default_rng(BASE_SEED)
    seeds = iter(range(BASE_SEED + 1, BASE_SEED + 1000))
    source_db, r_prime_db, background_air_db = (np.array(v) for v in (SOURCE_DB, R_PRIME_DB, BACKGROUND_DB))
    reverberation_s = np.array(REVERBERATION_S)
    absorption_m2 = 0.16 * RECEIVING_VOLUME_M3 / reverberation_s                 # A = 0.16 V / T
    level_difference_db = r_prime_db - 10.0 * np.log10(SEPARATING_AREA_M2 / absorption_m2)  # D = R' - 10 lg(S/A)
    standardized_db = level_difference_db + 10.0 * np.log10(reverberation_s / REFERENCE_TIME_S)
    normalized_db = level_difference_db - 10.0 * np.log10(absorption_m2 / REFERENCE_AREA_M2)
    transmitted_db = source_db - level_difference_db                               # L2 = L1 - D
    floor_db = quantisation_floor_db()
    background_recorded_db = energy_sum_db(background_air_db, floor_db)
    receiving_recorded_db = energy_sum_db(transmitted_db, background_recorded_db)
    spread_db = np.array(POSITION_SPREAD_DB)

    takes: dict[str, list[float]] = {}
    recordings: list[dict] = []

    def take(name: str, levels_db: np.ndarray, *, recorded_db: np.ndarray) -> None:
        samples = noise_with_band_levels(spectrum(levels_db, "dB", name), duration_s=TAKE_S,
                                         sample_rate_hz=SAMPLE_RATE_HZ, seed=next(seeds), level_offset_db=FULL_SCALE_DB)
        write_pcm16_flac(out_dir / name, samples)
        takes[name] = [round(float(v), 3) for v in recorded_db]

    for speaker in SPEAKERS:
        source_offsets = position_offsets_db(rng, len(MICROPHONES), spread_db)
        receiving_offsets = position_offsets_db(rng, len(MICROPHONES), spread_db)
        for mic, source_offset, receiving_offset in zip(MICROPHONES, source_offsets, receiving_offsets):
            name = f"src_s{speaker}_p{mic}.flac"
            take(name, source_db + source_offset, recorded_db=energy_sum_db(source_db + source_offset, floor_db))
            recordings.append({"file": name, "role": "source", "speaker": speaker})
        for mic, receiving_offset in zip(MICROPHONES, receiving_offsets):
            name = f"rec_s{speaker}_p{mic}.flac"
            # Transmitted sound at this position plus the room's steady background, as one noise:
            # independent Gaussian noises add to a Gaussian noise with the summed spectrum.
            air_db = energy_sum_db(transmitted_db + receiving_offset, background_air_db)
            take(name, air_db, recorded_db=energy_sum_db(air_db, floor_db))
            recordings.append({"file": name, "role": "receiving", "speaker": speaker})
    background_offsets = position_offsets_db(rng, len(BACKGROUND_POSITIONS),
                                             np.full(len(BANDS_HZ), BACKGROUND_SPREAD_DB))
    for position, offset in zip(BACKGROUND_POSITIONS, background_offsets):
        name = f"bg_p{position}.flac"
        take(name, background_air_db + offset, recorded_db=energy_sum_db(background_air_db + offset, floor_db))
        recordings.append({"file": name, "role": "background"})

    plain_t20 = []
    for speaker, mic in DECAYS:
        name = f"ir_s{speaker}_p{mic}.flac"
        weak = (speaker, mic) == WEAK_DECAY
        response = ringing_decay(reverberation_s, seed=next(seeds), rumble=weak)
        write_pcm16_flac(out_dir / name, response)
        recorded = np.round(response / LSB) * LSB
        plain_t20.append([np.nan if weak and f in WEAK_DECAY_BANDS_HZ else plain_t20_s(recorded, f, t)
                          for f, t in zip(BANDS_HZ, reverberation_s)])
        recordings.append({"file": name, "role": "decay", "speaker": speaker, "method": "impulse"})

    tone_dbfs = CALIBRATOR_DB - FULL_SCALE_DB
    for name, level_dbfs in (("cal_before.flac", tone_dbfs), ("cal_after.flac", tone_dbfs - CALIBRATION_DRIFT_DB)):
        write_pcm16_flac(out_dir / name, calibrator_tone(level_dbfs=level_dbfs, duration_s=CALIBRATION_S,
                                                         sample_rate_hz=SAMPLE_RATE_HZ, seed=next(seeds)))

    # What the ISO 16283-1 arithmetic gives from the exact recorded levels and the T the six
    # synthetic decays really carry (their noise fine structure scatters T around the truth):
    # what an ideal analysis of these files returns. The background rule changes D wherever the
    # margin is under 10 dB, and leaves the background in where it is 10 dB or more.
    realised_s = np.nanmean(plain_t20, axis=0)   # the weak take gives no T20 in its rumbling bands
    corrected_db, limited = background_rule(receiving_recorded_db, background_recorded_db)
    margin_db = receiving_recorded_db - background_recorded_db
    rule_d_db = source_db - corrected_db
    rule_dnt_db = rule_d_db + 10.0 * np.log10(realised_s / REFERENCE_TIME_S)
    rule_r_db = rule_d_db + 10.0 * np.log10(SEPARATING_AREA_M2 / (0.16 * RECEIVING_VOLUME_M3 / realised_s))

    true_dnt = rating_summary(standardized_db, "DnT")
    requirement_value_db = true_dnt["single_number_db"] + true_dnt["adaptation_terms_db"]["Ctr"]
    rounded = lambda values, digits=2: [round(float(v), digits) for v in values]  # noqa: E731
    expected = {
        "invented": True,
        "note": ("INVENTED demo data: a fictional building, invented spectra, synthesised recordings. "
                 "Not a measurement of anything real. Made by sample_audio/make_demo.py."),
        "title": TITLE,
        "bands_hz": list(BANDS_HZ),
        "calibration": {"full_scale_db": FULL_SCALE_DB, "calibrator_db": CALIBRATOR_DB,
                        "tone_before_dbfs": tone_dbfs, "tone_after_dbfs": tone_dbfs - CALIBRATION_DRIFT_DB,
                        "offset_before_db": FULL_SCALE_DB, "offset_after_db": FULL_SCALE_DB + CALIBRATION_DRIFT_DB,
                        "recordings_made_with_offset_db": FULL_SCALE_DB},
        "geometry": {"source_volume_m3": SOURCE_VOLUME_M3, "receiving_volume_m3": RECEIVING_VOLUME_M3,
                     "separating_area_m2": SEPARATING_AREA_M2},
        "requirement": {"text": REQUIREMENT, "example_only": True, "true_value_db": requirement_value_db,
                        "met_by_true_value": requirement_value_db >= 45},
        "true": {
            "source_level_db": rounded(source_db),
            "receiving_level_transmitted_db": rounded(transmitted_db),
            "background_level_in_air_db": rounded(background_air_db),
            "reverberation_time_s": rounded(reverberation_s, 3),
            "absorption_area_m2": rounded(absorption_m2),
            "apparent_sound_reduction_index_db": rounded(r_prime_db),
            "level_difference_db": rounded(level_difference_db),
            "normalized_level_difference_db": rounded(normalized_db),
            "standardized_level_difference_db": rounded(standardized_db),
            "ratings": {"R'": rating_summary(r_prime_db, "R'"), "DnT": true_dnt,
                        "Dn": rating_summary(normalized_db, "Dn"), "D": rating_summary(level_difference_db, "D")},
        },
        "as_recorded": {
            "quantisation_floor_db": rounded(floor_db),
            "background_level_db": rounded(background_recorded_db),
            "receiving_level_db": rounded(receiving_recorded_db),
            "background_margin_db": rounded(margin_db),
            "background_action": ["none" if m >= 10 else "limited" if m <= 6 else "corrected" for m in margin_db],
            "takes_band_level_db": takes,
        },
        "by_background_rule": {
            "note": ("ISO 16283-1 arithmetic on the exact recorded levels and on the T the decay files "
                     "carry (arithmetic mean of the decays' T20, plain scipy Butterworth and Schroeder; the "
                     "weak decay gives none at 50 and 63 Hz); limited bands are lower bounds. An ideal "
                     "analysis of the recordings reproduces these."),
            "reverberation_time_s": rounded(realised_s, 3),
            "receiving_level_db": rounded(corrected_db),
            "limited": [bool(v) for v in limited],
            "level_difference_db": rounded(rule_d_db),
            "standardized_level_difference_db": rounded(rule_dnt_db),
            "apparent_sound_reduction_index_db": rounded(rule_r_db),
            "ratings": {"R'": rating_summary(rule_r_db, "R'", limited),
                        "DnT": rating_summary(rule_dnt_db, "DnT", limited)},
        },
    }
    (out_dir / "expected.json").write_text(json.dumps(expected, indent=1) + "\n", encoding="utf-8")
    (out_dir / "survey.toml").write_text(survey_toml(recordings), encoding="utf-8")
    (out_dir / "wall.toml").write_text(WALL_TOML, encoding="utf-8")
    print_summary(expected)


def survey_toml(recordings: list[dict]) -> str:
    lines = [
        "# INVENTED demo survey: a fictional building and synthesised recordings (sample_audio/make_demo.py).",
        "# Nothing here was measured. The requirement is an example, not a claim about any regulation.",
        "",
        "[test]",
        f'title = "{TITLE}"',
        'type = "airborne"',
        f"separating_area_m2 = {SEPARATING_AREA_M2}",
        f"receiving_volume_m3 = {RECEIVING_VOLUME_M3}",
        f"source_volume_m3 = {SOURCE_VOLUME_M3}",
        f'requirement = "{REQUIREMENT}"   # example requirement',
        f'construction = "{CONSTRUCTION}"',
        'construction_file = "wall.toml"',
        "",
        "[calibration]   # invented chain: full-scale RMS = 125 dB re 20 uPa; 0.1 dB drift by the end",
        'file = "cal_before.flac"',
        f"reference_db = {CALIBRATOR_DB}",
        'file_after = "cal_after.flac"',
    ]
    for entry in recordings:
        lines += ["", "[[recording]]"]
        lines += [f"{key} = {json.dumps(value)}" for key, value in entry.items()]
    return "\n".join(lines) + "\n"


def print_summary(expected: dict) -> None:
    true = expected["true"]
    print(f"{'band':>6} {'L1':>6} {'L2':>6} {'B2':>6} {'T':>5} {'R_':>6} {'D':>6} {'DnT':>6}  background")
    for i, f in enumerate(expected["bands_hz"]):
        print(f"{f:6g} {true['source_level_db'][i]:6.1f} {true['receiving_level_transmitted_db'][i]:6.1f} "
              f"{expected['as_recorded']['background_level_db'][i]:6.1f} {true['reverberation_time_s'][i]:5.2f} "
              f"{true['apparent_sound_reduction_index_db'][i]:6.1f} {true['level_difference_db'][i]:6.1f} "
              f"{true['standardized_level_difference_db'][i]:6.1f}  {expected['as_recorded']['background_action'][i]}")
    rule_ratings = expected["by_background_rule"]["ratings"]
    for label, ratings in (("true", true["ratings"]), ("by background rule", rule_ratings)):
        for rating in ratings.values():
            terms = ", ".join(f"{k} {v:+d}" for k, v in rating["adaptation_terms_db"].items())
            print(f"{label}: {rating['descriptor']} = {rating['single_number_db']} dB "
                  f"({rating['single_number_precise_db']}); {terms}; bound {rating['bound']}")
    print(f"requirement {expected['requirement']['text']}: {expected['requirement']['true_value_db']} dB")


if __name__ == "__main__":
    main(Path(sys.argv[1]) if len(sys.argv) > 1 else OUT_DIR)
