"""The caution every page, email and API payload with a forecast or alert carries."""

CAUTION = (
    "Caution: Bloomline forecasts are model estimates with uncertainty. They are not a "
    "substitute for sampling, cell counts or toxin analysis, and never a safety clearance. "
    "The advisories and sampling of the local water-quality and public-health authorities "
    "prevail."
)
