"""The cautions every output carries (README, CLI help, report): one place."""

CAUTIONS = (
    "Estimates are for screening and planning only.",
    "Manning's equation assumes steady, uniform flow.",
    "Sections cut from a terrain model miss the channel below the water surface at the time "
    "of the survey flight (lidar does not see through water) and miss structures such as "
    "bridges and culverts.",
    "Results do not replace a field survey, a hydraulic model, local codes or licensed "
    "professional practice.",
)

CAUTION_LINE = ("Screening estimates only: steady uniform flow assumed; terrain sections miss the "
                "submerged channel and structures; no substitute for a field survey, a hydraulic "
                "model, local codes or licensed professional practice.")
