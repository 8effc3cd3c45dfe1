"""Resource and text limits hold everywhere, not only in one command: stored takes, survey measurement, texts."""

import make_data
import numpy as np
import pytest

from fieldtl.audio.ingest import MAX_WHOLE_READ_S
from fieldtl.errors import InputError
from fieldtl.measure import measure_take
from fieldtl.store import Store, TestSetup
from fieldtl.survey import TakeSpec
from fieldtl.validate import NAME_CHARS, NOTE_CHARS

RATE_HZ = 48_000
LIMIT_MESSAGE = f"is longer than the {MAX_WHOLE_READ_S:.0f} s allowed for a decay or calibration recording"


@pytest.fixture(scope="module")
def long_file(tmp_path_factory):
    """Silence one frame longer than the whole-read limit (16-bit, about 11.5 MB)."""
    path = tmp_path_factory.mktemp("long") / "long take.wav"
    return make_data.write(path, np.zeros(int(MAX_WHOLE_READ_S * RATE_HZ) + 1), subtype="PCM_16")


@pytest.fixture
def store_and_test():
    with Store.open(":memory:") as store:
        test = store.create_test(store.create_project("p").id,
                                 TestSetup(title="t", test_type="airborne", receiving_volume_m3=30.0))
        yield store, test.id


@pytest.mark.parametrize("role, options", [("decay", {"method": "impulse"}), ("calibration", {})])
def test_store_refuses_whole_read_takes_beyond_the_limit(store_and_test, long_file, role, options):
    store, test_id = store_and_test
    with pytest.raises(InputError) as caught:
        store.add_take(test_id, data=long_file.read_bytes(), original_name="long take.wav", role=role, **options)
    assert str(caught.value) == f"long take.wav: 120.0 s {LIMIT_MESSAGE}"
    assert store.list_takes(test_id) == () and list(store.audio_dir.iterdir()) == []


def test_store_keeps_level_takes_of_any_length(store_and_test, long_file):
    # Level takes stream block by block; the limit is for takes read whole.
    store, test_id = store_and_test
    take = store.add_take(test_id, data=long_file.read_bytes(), original_name="long take.wav", role="background")
    assert take.frames == int(MAX_WHOLE_READ_S * RATE_HZ) + 1


def test_survey_measurement_refuses_a_long_decay(long_file):
    spec = TakeSpec(file=long_file, role="decay", speaker=1, method="interrupted")
    with pytest.raises(InputError, match=f"^long take.wav: 120.0 s {LIMIT_MESSAGE}$"):
        measure_take(spec, level_offset_db=0.0)


@pytest.mark.parametrize("field, limit", [("name", NAME_CHARS), ("client", NAME_CHARS), ("engineer", NAME_CHARS),
                                          ("address", NOTE_CHARS)])
def test_project_texts_are_bounded_at_their_edge(field, limit):
    with Store.open(":memory:") as store:
        values = dict(name="p", client="", address="", engineer="")
        created = store.create_project(**(values | {field: "x" * limit}))           # exactly the limit
        with pytest.raises(InputError, match=f"project {field} is {limit + 1} characters long; at most {limit}"):
            store.create_project(**(values | {field: "x" * (limit + 1)}))
        with pytest.raises(InputError, match=f"project {field} is 10000000 characters long"):
            store.update_project(created.id, **{field: "x" * 10_000_000})
        assert store.list_projects() == (created,)


def test_band_levels_and_recording_names_are_bounded(store_and_test):
    store, test_id = store_and_test
    huge = "frequency_hz,L1\n" + "100,60\n" * 200_000                                 # 1.4 MB
    with pytest.raises(InputError, match="band levels is 1400016 characters long; at most 1000000"):
        store.set_band_levels(test_id, huge)
    with pytest.raises(InputError, match="recording name is 241 characters long; at most 240"):
        store.add_take(test_id, data=b"", original_name="n" * 241, role="source")
    assert store.get_test(test_id).band_levels_csv is None
