"""reachgauge: screening estimates of channel geometry, slope, bankfull stage and
Manning discharge for stream reaches cut from a terrain raster."""

__version__ = "0.1.0"

from reachgauge import manning  # noqa: E402
from reachgauge.errors import InputError, ReachgaugeWarning  # noqa: E402
from reachgauge.kernel.crosssection import CrossSection  # noqa: E402
from reachgauge.api import run  # noqa: E402

__all__ = ["CrossSection", "InputError", "ReachgaugeWarning", "manning", "run", "__version__"]
