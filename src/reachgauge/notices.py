"""The cautions every output carries (README, CLI help, report): one place."""

CAUTIONS = (
    "Estimates are for screening and planning only.",
    "Manning's equation assumes steady, uniform flow.",
    "Sections cut from a terrain model miss the channel below the water surface at the time "
    "of the survey flight (lidar does not see through water) and miss structures such as "
    "bridges and culverts.",
    "Design-flow footprints are a screening map of normal-depth water surfaces, not a flood "
    "hazard map: they know no backwater, storage, timing, structures or channel bed under water. "
    "Official flood maps and local codes govern wherever they exist.",
    "Regional curves fitted to a handful of reaches describe those reaches; uncertainty bands "
    "cover the inputs' stated ranges only, not the assumptions of the method.",
    "Results do not replace a field survey, a hydraulic model, local codes or licensed "
    "professional practice.",
)

CAUTION_LINE = ("Screening estimates only: steady uniform flow assumed; terrain sections miss the "
                "submerged channel and structures; no substitute for a field survey, a hydraulic "
                "model, local codes or licensed professional practice.")
