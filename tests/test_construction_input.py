"""Construction files and --layer texts: the causes of tracebacks found by fuzzing, and the
physical ranges at their edges (issue 8). Every refusal is one InputError line naming the file."""

import pytest

from fieldtl.construction import construction_from_layers, load_construction
from fieldtl.construction.predict import predict
from fieldtl.errors import InputError

_DOUBLE = ('name = "invented wall"\n[[leaf]]\nlayers = ["gypsum_board:12.5"]\n[[leaf]]\n'
           'layers = ["gypsum_board:12.5"]\n[cavity]\ndepth_mm = 75\nfill = "full"\nstuds = "timber"\n')


def _load(tmp_path, text):
    path = tmp_path / "wall.toml"
    path.write_text(text)
    return load_construction(path)


def _refused(tmp_path, text, words):
    with pytest.raises(InputError) as info:
        _load(tmp_path, text)
    message = str(info.value)
    assert message.startswith("wall.toml: ") and "\n" not in message and words in message, message
    assert len(message) < 400


@pytest.mark.parametrize("thickness, ok", [("0.1", True), ("1000", True), ("0.099", False), ("1000.1", False),
                                           ("0", False), ("1e308", False), ("1e400", False), ("nan", False)])
def test_cause_layer_thickness_of_zero_or_1e308(thickness, ok):
    # 1e308 mm made the surface mass overflow to inf (OverflowError in the coincidence frequency).
    if ok:
        construction = construction_from_layers([f"concrete_dense:{thickness}"])
        assert predict(construction).r_db.values
    else:
        with pytest.raises(InputError, match=r"thickness must be a number from 0.1 to 1000 mm|thickness must be"):
            construction_from_layers([f"concrete_dense:{thickness}"])


@pytest.mark.parametrize("depth, ok", [("1", True), ("2000", True), ("0.99", False), ("2000.5", False),
                                       ("0", False), ("1e308", False), ("inf", False), ("-75", False)])
def test_cause_cavity_depth_of_zero_or_1e308(tmp_path, depth, ok):
    text = _DOUBLE.replace("depth_mm = 75", f"depth_mm = {depth}")
    if ok:
        assert predict(_load(tmp_path, text)).r_db.values
    else:
        _refused(tmp_path, text, "[cavity] depth_mm must be a number from 1 to 2000 mm")


@pytest.mark.parametrize("spacing, ok", [("100", True), ("2000", True), ("99", False), ("2001", False)])
def test_stud_spacing_range_at_its_edges(tmp_path, spacing, ok):
    text = _DOUBLE + f"stud_spacing_mm = {spacing}\n"
    if ok:
        assert _load(tmp_path, text).cavity.stud_spacing_mm == float(spacing)
    else:
        _refused(tmp_path, text, "stud_spacing_mm must be a number from 100 to 2000 mm")


_MATERIAL = ('[[material]]\nname = "block_x"\ndensity_kg_m3 = 1350\nyoungs_modulus_gpa = 6.0\npoisson_ratio = 0.2\n'
             'loss_factor = 0.012\n[[leaf]]\nlayers = ["block_x:100"]\n')


@pytest.mark.parametrize("key, value, words", [
    ("density_kg_m3 = 1350", "density_kg_m3 = 1e308", "density_kg_m3 must be a number from 1 to 25000"),
    ("density_kg_m3 = 1350", "density_kg_m3 = 25001", "density_kg_m3 must be a number from 1 to 25000"),
    ("youngs_modulus_gpa = 6.0", "youngs_modulus_gpa = 1e400", "youngs_modulus_gpa must be a number"),
    ("youngs_modulus_gpa = 6.0", "youngs_modulus_gpa = true", "got true/false True"),
    ("poisson_ratio = 0.2", "poisson_ratio = 0.5", "poisson_ratio must be a number from 0 to below 0.5"),
    ("loss_factor = 0.012", "loss_factor = 0", "loss_factor must be a number above 0.0001 to below 1"),
    ("loss_factor = 0.012", "loss_factor = 1", "loss_factor must be a number above 0.0001 to below 1"),
    ('name = "block_x"', "name = 7", "[[material]] 1 needs a name without ':'"),
    ('name = "block_x"', 'name = "' + "b" * 121 + '"', "name is 121 characters long; at most 120"),
])
def test_cause_material_numbers_overflowing_or_of_the_wrong_type(tmp_path, key, value, words):
    _refused(tmp_path, _MATERIAL.replace(key, value), words)


def test_material_ranges_just_inside_pass(tmp_path):
    text = (_MATERIAL.replace("density_kg_m3 = 1350", "density_kg_m3 = 25000")
            .replace("poisson_ratio = 0.2", "poisson_ratio = 0.0").replace("loss_factor = 0.012", "loss_factor = 0.999"))
    layer = _load(tmp_path, text).leaves[0].layers[0]
    assert (layer.material.density_kg_m3, layer.material.poisson_ratio, layer.material.loss_factor) == (25000, 0.0, 0.999)


@pytest.mark.parametrize("change, words", [
    (('layers = ["gypsum_board:12.5"]', "layers = [12.5]"), "layer must be text, got a number 12.5"),
    (('layers = ["gypsum_board:12.5"]', 'layers = [["gypsum_board:12.5"]]'), "layer must be text, got a list"),
    (('fill = "full"', "fill = {}"), "[cavity] fill must be one of none, partial, full, got {}"),
    (('studs = "timber"', 'studs = ["timber"]'), "[cavity] studs must be one of"),
    (('name = "invented wall"', "name = 1979-05-27"), "name must be text, got date"),
    (('name = "invented wall"', 'name = "' + "n" * 2001 + '"'), "name is 2001 characters long; at most 2000"),
    (('name = "invented wall"', 'name = "w"\narea_m2 = 1e400'), "area_m2 must be a number from 0.1 to 10000 m2, got inf"),
    (('layers = ["gypsum_board:12.5"]', "layers = [" + ", ".join(['"gypsum_board:1"'] * 21) + "]"),
     "21 layers; at most 20"),
])
def test_cause_wrong_types_and_unbounded_texts(tmp_path, change, words):
    _refused(tmp_path, _DOUBLE.replace(*change, 1), words)


def test_cause_deeply_nested_construction_file(tmp_path):
    _refused(tmp_path, _DOUBLE + "deep = " + "[" * 50_000 + "]" * 50_000 + "\n", "nested too deeply")


def test_layer_text_echo_is_cut_to_80_characters():
    with pytest.raises(InputError) as info:
        construction_from_layers(["concrete_dense:" + "1" * 100])
    message = str(info.value)
    assert "1" * 81 not in message and "\n" not in message
