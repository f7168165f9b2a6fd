"""reachgauge: screening estimates of channel geometry, slope, bankfull stage and
Manning discharge for stream reaches cut from a terrain raster."""

import importlib

__version__ = "0.1.0"

__all__ = ["CrossSection", "InputError", "ReachgaugeWarning", "manning", "run", "__version__"]

_LAZY = {"manning": ("reachgauge.manning", None),
         "InputError": ("reachgauge.errors", "InputError"),
         "ReachgaugeWarning": ("reachgauge.errors", "ReachgaugeWarning"),
         "CrossSection": ("reachgauge.kernel.crosssection", "CrossSection"),
         "run": ("reachgauge.api", "run")}


def __getattr__(name):
    # Loaded on first use (PEP 562): the command line starts, and handles
    # Ctrl-C, before numpy and the kernel are imported.
    if name not in _LAZY:
        raise AttributeError(f"module 'reachgauge' has no attribute {name!r}")
    module, attr = _LAZY[name]
    mod = importlib.import_module(module)
    return mod if attr is None else getattr(mod, attr)
