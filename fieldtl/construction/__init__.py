"""Construction check: predict R of the declared wall or floor and compare it with the field R'.

Pure computation on frozen values; the construction file reader raises InputError for bad input,
and the comparison reports what it sees as findings. The function ``predict`` is imported from
:mod:`fieldtl.construction.predict` (re-exporting it here would hide the module of the same name).
"""

from fieldtl.construction.compare import Comparison, compare_with_measurement, comparison_to_json
from fieldtl.construction.materials import MATERIALS, Material
from fieldtl.construction.predict import Prediction, prediction_to_json
from fieldtl.construction.spec import (Cavity, Construction, Layer, Leaf, construction_from_dict,
                                       construction_from_layers, load_construction)

__all__ = ["MATERIALS", "Cavity", "Comparison", "Construction", "Layer", "Leaf", "Material", "Prediction",
           "compare_with_measurement", "comparison_to_json", "construction_from_dict", "construction_from_layers",
           "load_construction", "prediction_to_json"]
