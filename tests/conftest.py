import sys
from pathlib import Path

# test helper modules (terrain_fixtures, section_fixtures, report_fixtures) import by name
sys.path.insert(0, str(Path(__file__).resolve().parent))
