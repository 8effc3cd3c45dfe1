"""Background noise measured in every low-frequency corner and applied to that corner.

Sources: ISO 16283-1:2014 clause 10.4 / ISO 16283-2 clause 10.4, low-frequency procedure (as
transcribed; verify against a licensed copy): in a room under 25 m3 the background is measured in
every corner used and each corner level is corrected by it; Formulae (12)/(13): L_Corner is the
highest corner per band for each position, energy averaged over positions, and
L_LF = 10 lg[(10^(0.1 L_Corner) + 2·10^(0.1 L)) / 3]. ISO 16283-1 background rule: margin >= 10 dB
no correction, 6 < margin < 10 dB L = 10 lg(10^(Lsb/10) - 10^(Lb/10)), margin <= 6 dB minus 1.3 dB.
"""

from __future__ import annotations

import io
import math

import numpy as np
import pytest
import soundfile

from fieldtl.assess import assess
from fieldtl.bands import BandSpectrum
from fieldtl.checklist import TakeCount, checklist
from fieldtl.measure import measure_survey
from fieldtl.naming import position_words
from fieldtl.store import MIGRATIONS, Store, TestSetup
from fieldtl.errors import StoreError
from fieldtl.store import schema
from fieldtl.measure import takes_from_band_columns
from fieldtl.survey import Geometry, Survey, load_survey, read_band_levels_csv
import make_data

CORNERS = 4
CORNER_MARGIN_DB = 7.0   # written background this far under the corner's level: inside 6..10 dB


def _energy_mean(levels_db) -> float:
    return 10 * math.log10(np.mean([10 ** (v / 10) for v in levels_db]))


def _by_hand(signal_db: float, background_db: float) -> float:
    """ISO 16283-1 background rule, written out from the standard's text (not the code under test)."""
    margin = signal_db - background_db
    if margin >= 10.0:
        return signal_db
    if margin <= 6.0:
        return signal_db - 1.3
    return 10 * math.log10(10 ** (signal_db / 10) - 10 ** (background_db / 10))


@pytest.fixture(scope="module")
def measured(tmp_path_factory):
    folder = tmp_path_factory.mktemp("corner_bg")
    path = make_data.small_room_survey(folder)
    writer = make_data.SurveyWriter(folder)
    corner = [line for line in path.read_text().split("[[recording]]") if "receiving_corner" in line]
    assert len(corner) == 2 * CORNERS     # the shared survey: two loudspeaker positions, four corners each
    # the corners were written 4 dB above the room level L2; each corner's own background sits
    # CORNER_MARGIN_DB + 0.25 k dB under that corner level, so every corner has a different background
    t_s = BandSpectrum(make_data.WALL_BANDS, tuple(make_data.SMALL_ROOM_T_63_S if f <= 125 else 0.5
                                                   for f in make_data.WALL_BANDS), "s", "T")
    absorption_m2 = 0.16 * 20.0 / t_s.as_array()
    l2 = make_data.WALL_L1_TRUE.as_array() - (make_data.WALL_R_TRUE.as_array()
                                              - 10 * np.log10(make_data.WALL_S_M2 / absorption_m2))
    for k in range(1, CORNERS + 1):
        level = BandSpectrum.from_array(make_data.WALL_BANDS, l2 + 4.0 - CORNER_MARGIN_DB - 0.25 * k, "dB", "Bc")
        writer.take(f"bg_corner_{k}.wav", writer.noise(level, seed=950 + k), "background_corner", k)
    path.write_text(path.read_text() + "\n" + "\n".join(writer.entries))
    survey = load_survey(path)
    return survey, measure_survey(survey)


def _assessment(survey, measured, *, with_corner_backgrounds: bool):
    takes = [t for t in measured.takes if with_corner_backgrounds or t.role != "background_corner"]
    return assess(survey, takes, calibrated=measured.calibrated, findings=measured.findings), takes


def test_each_corner_is_corrected_by_its_own_background(measured):
    survey, result = measured
    assessment, takes = _assessment(survey, result, with_corner_backgrounds=True)
    assert "corner_background_missing" not in {f.code for f in assessment.findings}
    hz = 63.0
    level = {(t.role, t.speaker): [] for t in takes}
    for t in takes:
        if t.level_db is not None:
            level[(t.role, t.speaker)].append(t.level_db.at(hz))
    background_db = _energy_mean(level[("background", 1)])
    corner_bg_db = [level[("background_corner", k)][0] for k in range(1, CORNERS + 1)]
    default_db, highest_db = [], []
    for speaker in (1, 2):
        default_db.append(_by_hand(_energy_mean(level[("receiving", speaker)]), background_db))
        corners = level[("receiving_corner", speaker)]
        margins = [c - b for c, b in zip(corners, corner_bg_db)]
        assert all(6.0 < m < 10.0 for m in margins), margins     # the case the test is about
        highest_db.append(max(_by_hand(c, b) for c, b in zip(corners, corner_bg_db)))
    l_db, l_corner_db = _energy_mean(default_db), _energy_mean(highest_db)
    expected = 10 * math.log10((10 ** (0.1 * l_corner_db) + 2 * 10 ** (0.1 * l_db)) / 3)
    assert assessment.result.receiving_level_db.at(hz) == pytest.approx(expected, abs=0.01)
    # corrected with the room's average background instead, the corners would come out differently
    without, _ = _assessment(survey, result, with_corner_backgrounds=False)
    assert abs(without.result.receiving_level_db.at(hz) - expected) > 0.05


def test_without_corner_backgrounds_the_finding_and_checklist_say_so(measured):
    survey, result = measured
    assessment, takes = _assessment(survey, result, with_corner_backgrounds=False)
    assert "corner_background_missing" in {f.code for f in assessment.findings}
    counts = [TakeCount(t.role, t.speaker) for t in takes]
    items = [i for i in checklist(test_type="airborne", receiving_volume_m3=20.0, source_volume_m3=50.0, takes=counts)
             if i.role == "background_corner"]
    assert [(i.speaker, i.done) for i in items] == [(k, False) for k in range(1, CORNERS + 1)]
    done = checklist(test_type="airborne", receiving_volume_m3=20.0, source_volume_m3=50.0,
                     takes=[TakeCount(t.role, t.speaker) for t in result.takes])
    assert all(i.done for i in done if i.role == "background_corner")


def test_corner_background_lines_only_in_a_room_under_25_m3():
    # ISO 16283-1 clause 10.4 (as transcribed): 24.4 m3 rounds to 24 (LF procedure), 24.5 m3 to 25 (none)
    def corner_lines(volume_m3):
        return [i for i in checklist(test_type="impact", receiving_volume_m3=volume_m3, source_volume_m3=None,
                                     takes=()) if i.role == "background_corner"]
    assert len(corner_lines(24.4)) == CORNERS and corner_lines(24.5) == []


def test_a_corner_background_is_named_by_its_corner():
    assert position_words("background_corner", 2, 1, test_type="airborne") == \
        "background noise in receiving room corner 2"


def test_an_older_store_keeps_its_takes_and_accepts_a_corner_background(tmp_path, monkeypatch):
    buffer = io.BytesIO()
    soundfile.write(buffer, make_data.sine(1000.0, amplitude=0.5, duration_s=0.25), make_data.SAMPLE_RATE_HZ,
                    format="WAV")
    setup = TestSetup(title="Invented small room", test_type="airborne", receiving_volume_m3=20.0)
    database = tmp_path / "fieldtl.sqlite3"
    monkeypatch.setattr(schema, "MIGRATIONS", MIGRATIONS[:3])           # a store made before the role
    with Store.open(database) as old:
        test_id = old.create_test(old.create_project("Kept").id, setup).id
        kept = old.add_take(test_id, data=buffer.getvalue(), original_name="c1.wav", role="receiving_corner")
        with pytest.raises(StoreError, match="CHECK constraint"):    # the old table refuses the role
            old.add_take(test_id, data=buffer.getvalue(), original_name="b.wav", role="background_corner")
    monkeypatch.setattr(schema, "MIGRATIONS", MIGRATIONS)
    with Store.open(database) as upgraded:
        assert "m0004_background_corner_role" in upgraded.applied_migrations
        added = upgraded.add_take(test_id, data=buffer.getvalue(), original_name="b2.wav",
                                  role="background_corner", speaker=2)
        assert [(t.id, t.role, t.speaker) for t in upgraded.list_takes(test_id)] == \
            [(kept.id, "receiving_corner", 1), (added.id, "background_corner", 2)]


# Pasted sound-level-meter levels (invented), the same value in every band: exact arithmetic.
CORNERS_DB = {1: (58.0, 57.0, 56.0, 55.0), 2: (57.0, 58.0, 55.0, 54.0)}
CORNER_BACKGROUND_DB = (50.5, 48.0, 40.0, 30.0)   # corner 1: margins 7.5 and 6.5 dB; corner 2: 9 and 10 dB


def _pasted(with_corner_backgrounds: bool):
    bands = (50, 63, 80, 100, 125, 160, 200, 250, 315, 400, 500, 630, 800, 1000, 1250, 1600, 2000, 2500, 3150)
    header = ["frequency_hz", "L1_s1_a", "L1_s1_b", "L2_s1_a", "L2_s1_b", "L1_s2_a", "L1_s2_b", "L2_s2_a", "L2_s2_b",
              "B", "T"]
    values = [90.0] * 2 + [50.0] * 2 + [90.0] * 2 + [50.0] * 2 + [30.0, 0.5]
    for speaker, corners in CORNERS_DB.items():
        header += [f"L2c_s{speaker}_{k}" for k in range(1, CORNERS + 1)]
        values += corners
    if with_corner_backgrounds:
        header += [f"Bc_s{k}" for k in range(1, CORNERS + 1)]
        values += CORNER_BACKGROUND_DB
    text = "\n".join([",".join(header)] + [",".join([str(f)] + [f"{v:g}" for v in values]) for f in bands])
    columns = read_band_levels_csv(text, source_name="pasted")
    survey = Survey(title="Invented", test_type="airborne", geometry=Geometry(20.0, 10.0, 50.0),
                    source_name="pasted", band_columns=columns)
    return assess(survey, takes_from_band_columns(columns), calibrated=True)


def test_pasted_corner_backgrounds_correct_each_corner_exactly():
    assessment = _pasted(True)
    assert "corner_background_missing" not in {f.code for f in assessment.findings}
    l_db = 50.0          # default level: 20 dB over its background, no correction (ISO 16283-1 rule)
    highest_db = [max(_by_hand(c, b) for c, b in zip(corners, CORNER_BACKGROUND_DB)) for corners in CORNERS_DB.values()]
    # position 1: corner 1, 58 over 50.5 (margin 7.5 dB): 10 lg(10^5.8 - 10^5.05) = 57.25 dB beats corner 2's
    # 57 over 48 (9 dB) = 56.42 dB; position 2: corner 2, 58 over 48 (margin exactly 10 dB): not corrected
    assert highest_db[0] == pytest.approx(10 * math.log10(10 ** 5.8 - 10 ** 5.05)) and highest_db[1] == 58.0
    l_corner_db = _energy_mean(highest_db)
    expected = 10 * math.log10((10 ** (0.1 * l_corner_db) + 2 * 10 ** (0.1 * l_db)) / 3)
    for hz in (50.0, 63.0, 80.0):
        assert assessment.result.receiving_level_db.at(hz) == pytest.approx(expected, abs=1e-6)
    assert assessment.result.receiving_level_db.at(100.0) == pytest.approx(l_db)   # above the LF bands: untouched
    without = _pasted(False)
    assert "corner_background_missing" in {f.code for f in without.findings}
    # with the room's 30 dB background every corner keeps its level: position 1's highest is 58 dB
    assert without.result.receiving_level_db.at(63.0) == pytest.approx(
        10 * math.log10((10 ** 5.8 + 2 * 10 ** 5.0) / 3), abs=1e-6)
