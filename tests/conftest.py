import sys
from pathlib import Path

# test helper modules (terrain_fixtures, section_fixtures, report_fixtures) import by name
sys.path.insert(0, str(Path(__file__).resolve().parent))

import os  # noqa: E402

from hypothesis import settings  # noqa: E402

# CI explores the same examples every run (a failure there can be reproduced);
# local runs keep hypothesis's random search.
settings.register_profile("ci", derandomize=True, deadline=None, print_blob=True)
if os.environ.get("CI"):
    settings.load_profile("ci")
