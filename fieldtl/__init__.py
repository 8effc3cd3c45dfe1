"""fieldtl: field sound insulation between rooms from on-site recordings.

Importing the package is cheap and has no side effects; the computation core lives in
sub-packages and never imports Streamlit (only :mod:`fieldtl.ui` does).
"""

from fieldtl.bands import BandSpectrum
from fieldtl.errors import CalibrationError, FieldTLError, InputError, StoreError
from fieldtl.findings import Finding

__version__ = "0.1.0"

__all__ = ["BandSpectrum", "CalibrationError", "FieldTLError", "Finding", "InputError", "StoreError",
           "__version__"]
