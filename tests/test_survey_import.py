"""A survey folder imported into the store measures the same as the folder itself."""

from pathlib import Path

from fieldtl.assess import assess
from fieldtl.measure import measure_survey
from fieldtl.store import Store
from fieldtl.store.survey_import import import_survey
from fieldtl.survey import load_survey

DEMO = Path(__file__).resolve().parents[1] / "sample_audio" / "survey.toml"


def test_demo_survey_round_trips_through_the_store(tmp_path):
    survey = load_survey(DEMO)
    with Store.open(tmp_path / "db.sqlite3") as store:
        project = store.create_project("Invented demo")
        test = import_survey(store, survey, project_id=project.id)
        stored = store.survey_for_test(test.id)
    assert len(stored.takes) == len(survey.takes) and stored.calibration.file_after is not None
    assert stored.declared_construction == survey.declared_construction
    direct = assess(survey, measure_survey(survey).takes, calibrated=True)
    via_store = assess(stored, measure_survey(stored).takes, calibrated=True)
    assert direct.rating("DnT,w") == via_store.rating("DnT,w")
    assert direct.result.standardized_level_difference_db == via_store.result.standardized_level_difference_db


def test_pasted_levels_survey_is_imported_with_its_csv(tmp_path):
    (tmp_path / "slm.csv").write_text("frequency_hz,Li_s1_a,B,T\n100,60,30,0.5\n125,61,30,0.5\n")
    (tmp_path / "s.toml").write_text('[test]\ntitle = "Invented floor"\ntype = "impact"\nreceiving_volume_m3 = 30\n'
                                     'band_levels = "slm.csv"\n')
    with Store.open(":memory:") as store:
        test = import_survey(store, load_survey(tmp_path / "s.toml"), project_id=store.create_project("p").id)
        assert store.get_test(test.id).band_levels_csv.startswith("frequency_hz,Li_s1_a")
