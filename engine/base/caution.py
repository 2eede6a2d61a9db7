"""The caution carried by the README, the dashboard and every exported report."""

CAUTION = (
    "Screening-level results from the supplied data only. Mount and damping choices can "
    "hurt people when they fail (machinery coming loose, fatigue, fire, chemical attack): "
    "verify the choice on the real part; consider creep, fatigue, ozone, oil and fluid "
    "resistance, fire ratings and bonding; follow the applicable local codes and standards "
    "and the judgement of a qualified engineer."
)
# The one line the dashboard shows above every page; it opens to CAUTION in full.
CAUTION_LINE = "⚠ Caution: screening only, verify on the part"
