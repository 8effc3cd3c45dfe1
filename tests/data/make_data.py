"""Recipes for the small audio files the tests use; nothing is downloaded.

Run ``python tests/data/make_data.py OUTDIR`` to write them by hand; the tests call the same
functions into pytest's temporary folders.
"""

from __future__ import annotations

import sys
from pathlib import Path

import numpy as np
import soundfile

SAMPLE_RATE_HZ = 48_000


def sine(frequency_hz: float, *, amplitude: float, duration_s: float,
         sample_rate_hz: int = SAMPLE_RATE_HZ) -> np.ndarray:
    """A sine of peak ``amplitude`` (full scale 1.0); its RMS level is 20 lg(amplitude/sqrt 2) dBFS."""
    time_s = np.arange(int(round(duration_s * sample_rate_hz))) / sample_rate_hz
    return amplitude * np.sin(2 * np.pi * frequency_hz * time_s)


def write(path: Path, samples: np.ndarray, *, sample_rate_hz: int = SAMPLE_RATE_HZ,
          subtype: str = "PCM_24") -> Path:
    soundfile.write(str(path), samples, sample_rate_hz, subtype=subtype)
    return path


def calibrator_tone(path: Path, *, rms_dbfs: float = -26.0, duration_s: float = 5.0,
                    frequency_hz: float = 1000.0, sample_rate_hz: int = SAMPLE_RATE_HZ) -> Path:
    """A 1 kHz calibrator-like tone with a 0.3 s fade-in (the settling start) and faint noise."""
    amplitude = np.sqrt(2) * 10 ** (rms_dbfs / 20)
    tone = sine(frequency_hz, amplitude=amplitude, duration_s=duration_s, sample_rate_hz=sample_rate_hz)
    fade = int(0.3 * sample_rate_hz)
    tone[:fade] *= np.linspace(0.0, 1.0, fade)
    tone += 1e-5 * np.random.default_rng(1).standard_normal(tone.size)
    return write(path, tone, sample_rate_hz=sample_rate_hz)


def truncated_copy(source: Path, path: Path) -> Path:
    """The first half of ``source``'s bytes: a header that promises more audio than there is."""
    data = source.read_bytes()
    path.write_bytes(data[: len(data) // 2])
    return path


def main(out_dir: str) -> None:
    folder = Path(out_dir)
    folder.mkdir(parents=True, exist_ok=True)
    write(folder / "sine_1k_half_scale.wav", sine(1000, amplitude=0.5, duration_s=0.5))
    calibrator_tone(folder / "calibrator_94db.wav")
    truncated_copy(folder / "sine_1k_half_scale.wav", folder / "truncated.wav")
    (folder / "not_audio.wav").write_text("this is text, not audio\n")
    (folder / "empty.wav").write_bytes(b"")


if __name__ == "__main__":
    main(sys.argv[1] if len(sys.argv) > 1 else "tests/data/out")


# --- whole synthetic surveys with a known truth (end-to-end tests) ---------------------------------

def _invented_wall():
    """An invented masonry-like wall and rooms: R' rising about 5 dB per octave, a pink-ish source,
    a quiet receiving room. Returns (bands, S m2, V receiving m3, V source m3, R', L1, B, T)."""
    from fieldtl.bands import THIRD_OCTAVES_50_5000_HZ, BandSpectrum

    bands = THIRD_OCTAVES_50_5000_HZ
    n = len(bands)
    return (bands, 11.0, 40.0, 52.0,
            BandSpectrum(bands, tuple(34.0 + 16.5 * np.log2(f / 50.0) / 3.3 for f in bands), "dB", "R'"),
            BandSpectrum(bands, tuple(96.0 - 0.3 * i for i in range(n)), "dB", "L1"),
            BandSpectrum(bands, tuple(26.0 - 1.0 * i for i in range(n)), "dB", "B"),
            BandSpectrum(bands, tuple(0.75 - 0.015 * i for i in range(n)), "s", "T"))


WALL_BANDS, WALL_S_M2, WALL_V2_M3, WALL_V1_M3, WALL_R_TRUE, WALL_L1_TRUE, WALL_B_TRUE, WALL_T_TRUE = _invented_wall()


class SurveyWriter:
    """Writes takes, decays and a calibrator tone into ``folder`` and the survey file naming them.

    Levels are written with full scale = ``level_offset_db`` dB and a matching 94 dB calibrator tone.
    """

    def __init__(self, folder: Path, *, level_offset_db: float = 125.0, take_s: float = 8.0) -> None:
        self.folder, self.level_offset_db, self.take_s = folder, level_offset_db, take_s
        self.entries: list[str] = []

    def noise(self, levels_db, *, seed: int) -> np.ndarray:
        from fieldtl.audio.synthesis import noise_with_band_levels
        return noise_with_band_levels(levels_db, duration_s=self.take_s, sample_rate_hz=SAMPLE_RATE_HZ, seed=seed,
                                      level_offset_db=self.level_offset_db)

    def take(self, name: str, samples: np.ndarray, role: str, speaker: int = 1, extra: str = "") -> None:
        write(self.folder / name, samples, subtype="FLOAT")
        self.entries.append(f'[[recording]]\nfile = "{name}"\nrole = "{role}"\nspeaker = {speaker}\n{extra}')

    def decays(self, reverberation_s, *, count: int = 3) -> None:
        from fieldtl.audio.synthesis import impulse_response_with_decay
        for i in range(count):
            ir = impulse_response_with_decay(reverberation_s, sample_rate_hz=SAMPLE_RATE_HZ, duration_s=2.0,
                                             seed=700 + i, noise_floor_db=60.0)
            self.take(f"ir_{i}.wav", ir, "decay", extra='method = "impulse"\n')

    def finish(self, test_table: str) -> Path:
        from fieldtl.audio.synthesis import calibrator_tone
        write(self.folder / "cal.wav", calibrator_tone(level_dbfs=94.0 - self.level_offset_db, duration_s=4.0,
                                                       sample_rate_hz=SAMPLE_RATE_HZ, seed=5), subtype="FLOAT")
        survey = self.folder / "survey.toml"
        survey.write_text(f'[test]\n{test_table}\n[calibration]\nfile = "cal.wav"\nreference_db = 94.0\n\n'
                          + "\n".join(self.entries))
        return survey


def airborne_survey(folder: Path, *, reduction_db, source_db, background_db, reverberation_s,
                    area_m2: float, receiving_volume_m3: float, source_volume_m3: float,
                    requirement: str = "DnT,w + Ctr >= 45", speakers: int = 2, microphones: int = 2) -> Path:
    """Recordings of an airborne test whose true R', L1, background and T are the given spectra.

    L2 = L1 - D with D = R' - 10 lg(S/A), A = 0.16 V/T (ISO 16283-1), written with the same noise
    seed as the source room: the receiving-room sound is the source sound filtered by the wall,
    as in a real transmission. Background noise (another seed) is added energetically.
    """
    from fieldtl.bands import BandSpectrum

    writer = SurveyWriter(folder)
    bands = reduction_db.nominal_hz
    absorption_m2 = 0.16 * receiving_volume_m3 / reverberation_s.as_array()
    d_db = reduction_db.as_array() - 10 * np.log10(area_m2 / absorption_m2)
    l2 = BandSpectrum.from_array(bands, source_db.as_array() - d_db, "dB", "L2")
    for speaker in range(1, speakers + 1):
        for mic in range(microphones):
            seed = 100 * speaker + mic
            writer.take(f"src_{speaker}_{mic}.wav", writer.noise(source_db, seed=seed), "source", speaker)
            receiving = writer.noise(l2, seed=seed) + writer.noise(background_db, seed=seed + 50)
            writer.take(f"rec_{speaker}_{mic}.wav", receiving, "receiving", speaker)
    for i in range(2):
        writer.take(f"bg_{i}.wav", writer.noise(background_db, seed=900 + i), "background")
    writer.decays(reverberation_s)
    return writer.finish(f'title = "Invented end-to-end check"\ntype = "airborne"\nseparating_area_m2 = {area_m2}\n'
                         f'receiving_volume_m3 = {receiving_volume_m3}\nsource_volume_m3 = {source_volume_m3}\n'
                         f'requirement = "{requirement}"\n')


def impact_survey(folder: Path, *, impact_db, background_db, reverberation_s, receiving_volume_m3: float,
                  requirement: str = "L'nT,w <= 62", tapping_positions: int = 4, microphones: int = 2) -> Path:
    """Recordings of an impact test whose true Li (receiving-room level), background and T are given."""
    writer = SurveyWriter(folder)
    for position in range(1, tapping_positions + 1):
        for mic in range(microphones):
            seed = 100 * position + mic
            level = writer.noise(impact_db, seed=seed) + writer.noise(background_db, seed=seed + 50)
            writer.take(f"tap_{position}_{mic}.wav", level, "impact", position)
    for i in range(2):
        writer.take(f"bg_{i}.wav", writer.noise(background_db, seed=900 + i), "background")
    writer.decays(reverberation_s)
    return writer.finish(f'title = "Invented impact end-to-end check"\ntype = "impact"\n'
                         f'receiving_volume_m3 = {receiving_volume_m3}\nrequirement = "{requirement}"\n')


SMALL_ROOM_T_63_S = 0.9   # the invented small room's T from 50 to 125 Hz (so in its 63 Hz octave and the skirts)


def small_room_survey(folder: Path, *, receiving_volume_m3: float = 20.0) -> Path:
    """An airborne test into an invented small receiving room (under 25 m3) with corner takes.

    T is SMALL_ROOM_T_63_S at 50-125 Hz (so the 63 Hz octave filter's skirts see the same decay) and
    0.5 s above; four receiving-room corners per loudspeaker position read 4 dB
    above the room. No corner background (the survey has no role for it).
    """
    from fieldtl.bands import BandSpectrum

    writer = SurveyWriter(folder)
    bands = WALL_BANDS
    t_s = BandSpectrum(bands, tuple(SMALL_ROOM_T_63_S if f <= 125 else 0.5 for f in bands), "s", "T")
    absorption_m2 = 0.16 * receiving_volume_m3 / t_s.as_array()
    d_db = WALL_R_TRUE.as_array() - 10 * np.log10(WALL_S_M2 / absorption_m2)
    l2 = BandSpectrum.from_array(bands, WALL_L1_TRUE.as_array() - d_db, "dB", "L2")
    corner = BandSpectrum.from_array(bands, l2.as_array() + 4.0, "dB", "L2c")
    for speaker in (1, 2):
        for mic in range(2):
            seed = 100 * speaker + mic
            writer.take(f"src_{speaker}_{mic}.wav", writer.noise(WALL_L1_TRUE, seed=seed), "source", speaker)
            receiving = writer.noise(l2, seed=seed) + writer.noise(WALL_B_TRUE, seed=seed + 50)
            writer.take(f"rec_{speaker}_{mic}.wav", receiving, "receiving", speaker)
        for i in range(4):
            samples = writer.noise(corner, seed=300 + 10 * speaker + i) + writer.noise(WALL_B_TRUE, seed=400 + i)
            writer.take(f"corner_{speaker}_{i}.wav", samples, "receiving_corner", speaker)
    for i in range(2):
        writer.take(f"bg_{i}.wav", writer.noise(WALL_B_TRUE, seed=900 + i), "background")
    writer.decays(t_s)
    return writer.finish(f'title = "Invented small-room check"\ntype = "airborne"\nseparating_area_m2 = {WALL_S_M2}\n'
                         f'receiving_volume_m3 = {receiving_volume_m3}\nsource_volume_m3 = {WALL_V1_M3}\n'
                         'requirement = "DnT,w + Ctr,50-3150 >= 40"\n')
