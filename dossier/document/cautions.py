"""The standard cautions every dossier carries. Not a theme option: themes cannot remove them.

The render stage refuses to write a dossier whose pages lack the cautions block.
"""

from __future__ import annotations

CAUTIONS_ID = "safety-cautions"

CAUTIONS: tuple[tuple[str, str], ...] = (
    (
        "Rig results are not road results",
        "These forces and moments were measured on a test rig (flat belt or drum), not on a road. "
        "Friction level, surface texture, temperature and wear differ from any road, so absolute grip "
        "values do not transfer directly to vehicle behaviour. Use them to compare specimens tested "
        "under the same recorded conditions.",
    ),
    (
        "Scope of the results",
        "Results apply only to the specimens, operating conditions, data files and software version "
        "recorded in this dossier. Values outside the measured load and slip ranges are extrapolation "
        "and are labelled as such.",
    ),
    (
        "Load, speed and inflation",
        "Never operate a tire above the load of its load index or the speed of its speed symbol, or at "
        "an inflation pressure other than the one the vehicle maker specifies. A test load above the "
        "rated load is shown as a finding; it is not an approval to use the tire at that load.",
    ),
    (
        "Age and condition",
        "Inspect tires for age, damage and wear before use. Tire age is read from the date code on the "
        "sidewall; many makers advise replacing tires older than six to ten years regardless of tread depth.",
    ),
    (
        "Engineering judgment and regulations",
        "This dossier informs, and does not replace, the decision of qualified engineers. Approval rests "
        "with them under the applicable regulations (for example FMVSS 139 and UN ECE R30, R54 and R117), "
        "local codes and licensed engineering judgment.",
    ),
)
