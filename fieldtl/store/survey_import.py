"""A survey folder (survey.toml, its recordings, construction file, pasted levels) into the store.

Used to load the invented demo on first start, and by anyone who measured with a recorder and
wrote a survey file. Every take goes through Store.add_take, so bad audio is refused one take at a
time with nothing half-stored.
"""

from __future__ import annotations

from fieldtl.store.schema import CONSTRUCTION_SETTING, TestRecord, TestSetup
from fieldtl.store.sqlite import Store
from fieldtl.survey import Survey


def import_survey(store: Store, survey: Survey, *, project_id: int) -> TestRecord:
    """Create a test in ``project_id`` holding the survey's setup, recordings and pasted levels."""
    settings = {CONSTRUCTION_SETTING: survey.construction_toml} if survey.construction_toml else {}
    calibration = survey.calibration
    setup = TestSetup(title=survey.title, test_type=survey.test_type,
                      receiving_volume_m3=survey.geometry.receiving_volume_m3,
                      separating_area_m2=survey.geometry.separating_area_m2,
                      source_volume_m3=survey.geometry.source_volume_m3, construction=survey.construction or "",
                      requirement=survey.requirement, element_lab_rw_db=survey.element_lab_rw_db,
                      uncertainty_situation=survey.uncertainty_situation,
                      calibrator_db=calibration.reference_db if calibration else 94.0, settings=settings)
    test = store.create_test(project_id, setup)
    if calibration is not None:
        store.add_take(test.id, data=calibration.file.read_bytes(), original_name=calibration.file.name,
                       role="calibration", channel=calibration.channel)
        if calibration.file_after is not None:
            store.add_take(test.id, data=calibration.file_after.read_bytes(), original_name=calibration.file_after.name,
                           role="calibration_after", channel=calibration.channel)
    for take in survey.takes:
        store.add_take(test.id, data=take.file.read_bytes(), original_name=take.file.name, role=take.role,
                       speaker=take.speaker, method=take.method, channel=take.channel,
                       sweep_start_hz=take.sweep_start_hz, sweep_stop_hz=take.sweep_stop_hz,
                       sweep_length_s=take.sweep_length_s)
    if survey.band_levels_csv is not None:
        test = store.set_band_levels(test.id, survey.band_levels_csv)
    return store.get_test(test.id)
