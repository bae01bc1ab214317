"""Default parameters of the nutrient–phytoplankton model, with their sources.

This module is the one place where Bloomline's default rate constants live;
``assimilation.spec`` takes its dataclass defaults from here and nothing else
repeats the numbers.

Values are typical mid-range figures for a eutrophic temperate lake, chosen so
that a new water body runs before any tuning. Sources:

[1] Bowie, G.L. et al. (1985) Rates, Constants, and Kinetics Formulations in
    Surface Water Quality Modeling, 2nd ed. US EPA, EPA/600/3-85/040.
[2] Chapra, S.C. (1997) Surface Water-Quality Modeling. McGraw-Hill, ch. 33–34.
[3] Eppley, R.W. (1972) Temperature and phytoplankton growth in the sea.
    Fishery Bulletin 70:1063–1085.
[4] Steele, J.H. (1962) Environmental control of photosynthesis in the sea.
    Limnology and Oceanography 7:137–150.
[5] Redfield, A.C. (1958) The biological control of chemical factors in the
    environment. American Scientist 46:205–221.
[6] Janse, J.H. (2005) Model studies on the eutrophication of shallow lakes
    and ditches. PhD thesis, Wageningen University (PCLake), and Hipsey,
    M.R. et al. (2013) Computational Aquatic Ecosystem Dynamics Model
    (CAEDYM) v3 Science Manual, University of Western Australia: nitrogen
    fixers whose N limitation has a floor paid by slower growth (as
    recalled, from memory).
[7] Hense, I. and Beckmann, A. (2006) Towards a model of cyanobacteria life
    cycle — effects of growing and resting stages on bloom formation of
    N2-fixing species. Ecological Modelling 195:205–218 (a lower growth rate
    of diazotrophs as the energetic cost of fixation).

Values marked "from memory" are mid-range figures from the compilations [1]
and [2] as recalled, not re-read from the tables; they are starting values
for the filter's parameter estimation, not calibrated constants.

Choice of the cyanobacteria advantage (documented here once)
-------------------------------------------------------------
Warm, calm, nitrogen-poor water favours cyanobacteria in Bloomline through
the combination of:

* a steeper temperature response (theta 1.10 against Eppley's 1.065 for the
  green algae) from a lower rate at 20 °C (1.2 against 2.0 /d): the gap in
  maximum growth narrows from 2.1× at 12 °C to 1.3× at 27 °C;
* buoyancy: no settling loss, while the green algae settle at 0.15 m/d,
  which costs them 0.06 /d in a 2.5 m deep arm (settling stands for calm
  water; mixing by wind is not modelled);
* nitrogen fixation (``nitrogen_fixing``): when dissolved inorganic N is
  short, a fixer grows at no less than FIXATION_GROWTH_FRACTION of its
  maximum rate and takes the missing N from dissolved N2 (see
  :func:`assimilation.kinetics.nitrogen_limitation_with_fixation`); fixed N
  is a source of total N that the mass budget books as ``fixation``;
* a low nitrogen half-saturation (5 against 15 µg N/L);
* a lower light saturation (shade tolerance under self-shading) and a
  slightly higher phosphorus affinity (K_P 1.5 against 2 µg P/L), so a
  small cyanobacteria population persists through a phosphorus-limited
  early summer and can bloom once nitrogen runs low.

The green algae win in cool, nitrogen-rich water by their faster growth.
The checks in tests/assimilation/test_cyanobacteria_bloom.py pin both
outcomes.
"""
from __future__ import annotations

# --- stoichiometry -----------------------------------------------------------
#: Carbon to chlorophyll-a ratio [mg C / mg chl-a]; range 20–100 in [1], [2].
CARBON_TO_CHLOROPHYLL = 50.0
#: Redfield ratio by mass, C:N:P = 41:7.2:1 [5] (106:16:1 molar).
REDFIELD_NITROGEN_TO_CARBON = 7.2 / 41.0
REDFIELD_PHOSPHORUS_TO_CARBON = 1.0 / 41.0
#: Nitrogen held per unit chlorophyll-a [µg N / µg chl-a].
NITROGEN_TO_CHLOROPHYLL = CARBON_TO_CHLOROPHYLL * REDFIELD_NITROGEN_TO_CARBON
#: Phosphorus held per unit chlorophyll-a [µg P / µg chl-a].
PHOSPHORUS_TO_CHLOROPHYLL = CARBON_TO_CHLOROPHYLL * REDFIELD_PHOSPHORUS_TO_CARBON

# --- light -------------------------------------------------------------------
#: Photosynthetically active fraction of shortwave radiation [-]; 0.43–0.50
#: (common practice).
PAR_FRACTION = 0.45
#: Background light attenuation of water, dissolved and suspended matter
#: [1/m]; Kd ≈ 1.7 / Secchi depth, so 0.8 /m is clear-water Secchi ≈ 2 m
#: (rule of thumb in [2]).
BACKGROUND_ATTENUATION_PER_M = 0.8
#: Chlorophyll-specific attenuation [m² / mg chl-a]; 0.014–0.016 (from memory,
#: consistent with the linear term of Riley's formula).
CHLOROPHYLL_ATTENUATION_M2_MG = 0.016
#: Secchi depth × attenuation coefficient [-] (rule of thumb Kd ≈ 1.7 / SD).
SECCHI_ATTENUATION_PRODUCT = 1.7

# --- recycling, detritus and sediment ---------------------------------------
#: Fraction of mortality/respiration returned at once to dissolved N and P
#: [-] (excretion and respiration); the rest becomes detritus (see
#: DETRITAL_FRACTION). Mid-range of [2] (from memory).
RECYCLED_FRACTION = 0.5
#: Fraction of the non-recycled mortality that becomes detrital N and P [-];
#: the rest leaves the water column at once. All of it: in the
#: nutrient–phytoplankton–detritus scheme of [2] (ch. 33, organic N and P
#: pools fed by algal death) the dead algae enter the organic pools and leave
#: only by settling; a chemostat without detritus sets 0 (from memory).
DETRITAL_FRACTION = 1.0
#: Remineralisation of detrital (organic) nitrogen to DIN at 20 °C [1/d]:
#: the organic-N mineralisation rate of the WASP eutrophication kinetics,
#: 0.075 /d, within the 0.02–0.4 /d of organic-N hydrolysis compiled in
#: [1] and [2] (from memory).
NITROGEN_REMINERALISATION_20_PER_D = 0.075
#: Remineralisation of detrital (organic) phosphorus to SRP at 20 °C [1/d]:
#: the organic-P mineralisation rate of the WASP eutrophication kinetics,
#: 0.22 /d, within the 0.01–0.7 /d compiled in [1] and [2] (from memory).
PHOSPHORUS_REMINERALISATION_20_PER_D = 0.22
#: Temperature coefficient of remineralisation [-]; 1.08 in [1], [2] and
#: WASP (from memory).
THETA_REMINERALISATION = 1.08
#: Settling velocity of detritus [m/d], a loss to the sediment; particulate
#: organic matter settles at 0.05–0.5 m/d in [1], [2]; low end, as fine
#: detritus settles slower than living diatoms (from memory).
DETRITUS_SETTLING_M_PER_D = 0.1
#: Internal phosphorus release from the sediment at 20 °C [mg P / m² / d],
#: per basin: the prior of the filter's estimate. Site-specific, 0.1–10
#: mg/m²/d from oxic to anoxic sediments (from memory); 1 is a mid-range
#: start on the log scale that the filter's estimate moves from. A water
#: body or basin without internal loading sets 0 (then it is not estimated).
SEDIMENT_PHOSPHORUS_RELEASE_20_MG_M2_D = 1.0
#: Temperature coefficient of sediment phosphorus release [-] (from memory).
THETA_SEDIMENT_RELEASE = 1.08

#: Denitrification, a first-order loss of dissolved inorganic nitrogen to N2
#: at the sediment–water interface, at 20 °C [1/d]; 0.01–0.1 /d in lakes
#: (from memory, ranges of [1], [2] ch. 28). Mid-low value.
DENITRIFICATION_20_PER_D = 0.02
#: Temperature coefficient of denitrification [-]; 1.045 in [2] (from memory).
THETA_DENITRIFICATION = 1.045

#: Growth rate of a nitrogen fixer with no dissolved inorganic N, as a
#: fraction of its maximum rate [-]: the energetic cost of fixing N2.
#: Fixers grow roughly half as fast on N2 as on DIN [6], [7] (0.4–0.6, from
#: memory).
FIXATION_GROWTH_FRACTION = 0.5

# --- phytoplankton groups (rates at 20 °C) ----------------------------------
#: Eppley (1972) [3]: log10 mu = 0.0275 T − 0.070, i.e. theta = 10**0.0275.
THETA_EPPLEY = 10.0 ** 0.0275

GREEN_ALGAE = dict(
    name="green_algae",
    mu_max_20_per_d=2.0,          # 1–3 /d in [1] (from memory)
    theta_growth=THETA_EPPLEY,    # Eppley (1972) [3]: 10**0.0275 = 1.065
    k_n_ugL=15.0,                 # K_N 5–25 µg N/L in [1] (from memory)
    k_p_ugL=2.0,                  # K_P 1–5 µg P/L in [1] (from memory)
    light_saturation_W_m2=80.0,   # PAR, Steele optimum [4]; from memory
    mortality_20_per_d=0.1,       # respiration + mortality ≈ 0.1 /d [1] (from memory)
    theta_mortality=1.08,         # [1] (from memory)
    settling_m_per_d=0.15,        # 0.05–0.5 m/d in [1] (from memory)
    is_cyanobacteria=False,
    nitrogen_fixing=False,
)

CYANOBACTERIA = dict(
    name="cyanobacteria",
    mu_max_20_per_d=1.2,          # slower than greens at 20 °C [1] (from memory)
    theta_growth=1.10,            # steeper temperature response (from memory)
    k_n_ugL=5.0,                  # low K_N for DIN, K_N 5–25 µg N/L in [1] (from memory)
    k_p_ugL=1.5,                  # high P affinity, K_P 1–5 µg P/L in [1] (from memory)
    light_saturation_W_m2=50.0,   # shade tolerant (from memory)
    mortality_20_per_d=0.08,      # [1] (from memory)
    theta_mortality=1.08,         # [1] (from memory)
    settling_m_per_d=0.0,         # buoyant: no net settling (common practice)
    is_cyanobacteria=True,
    nitrogen_fixing=True,         # N2-fixing cyanobacteria (Nostocales) [6], [7]
)


def default_groups():
    """The default phytoplankton groups: green algae and cyanobacteria.

    Returns a tuple of :class:`assimilation.spec.Group` with rates at 20 °C
    (see the module docstring for the sources and the choice of the
    cyanobacteria advantage).
    """
    from assimilation.spec import Group

    return (Group(**GREEN_ALGAE), Group(**CYANOBACTERIA))


def default_spec(basins, network, groups=None):
    """A :class:`assimilation.spec.ModelSpec` with Bloomline's default constants.

    basins: sequence of :class:`Basin`; network: :class:`Network`;
    groups: sequence of :class:`Group` (default :func:`default_groups`).
    """
    from assimilation.spec import ModelSpec

    if groups is None:
        groups = default_groups()
    return ModelSpec(basins=tuple(basins), groups=tuple(groups), network=network)

