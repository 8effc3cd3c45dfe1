import sys
from pathlib import Path

# tests/data/make_data.py holds the recipes of every generated test file.
sys.path.insert(0, str(Path(__file__).parent / "data"))
