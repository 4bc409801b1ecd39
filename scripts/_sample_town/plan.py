"""The plan of Brackenhollow: its extent, terrain, pipe sizes, loads and planted-error settings."""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

SEED = 18_900_417
CRS = "EPSG:32630"
ORIGIN_E, ORIGIN_N = 487_350.0, 4_983_120.0  # invented; open water, no real place
TOWN_SPAN_M = 2_600.0  # west outfall to east outfall
TIMESTAMP = "2020-01-01T00:00:00Z"  # pinned so that the GeoPackage bytes repeat

TRUNK_STEP_M, LATERAL_STEP_M, SPUR_STEP_M = 85.0, 50.0, 40.0
JITTER_M, BEND_SHARE, BEND_OFFSET_M = 2.5, 0.3, (1.5, 5.0)
LATERAL_NODES = (3, 8)  # manholes per lateral side, inclusive range
SPUR_SHARE = 0.12  # share of lateral manholes with a short cul-de-sac spur

RIVER_LEVEL_M, GRADE_TRUNK, GRADE_CROSS = 12.0, 0.0035, 0.015
RIDGE_SOFT_M, VALLEY_SOFT_M = 60.0, 20.0
VALLEY_AMP_M, VALLEY_WAVE_M = 35.0, 1_400.0
UNDULATION_M, UNDULATION_WAVE_M = (0.25, 0.2), (900.0, 520.0)
BANK_HEIGHT_M, BANK_WIDTH_M = 6.0, 10.0  # a river terrace crossed by the East trunk

MIN_GRADE = 0.0035  # inverts fall at least this much along every pipe (1 in 286)
DEPTH_MIN_M, DEPTH_SPREAD_M, DEPTH_TRUNK_EXTRA_M = 1.6, 0.3, 1.5
CIRCULAR_MM = np.array([150, 225, 300, 375, 450, 525, 600, 675, 750, 825, 900, 1050, 1200])
EGG_SPAN_MM = np.array([500, 600, 700, 800, 900, 1000, 1100, 1200])  # rise = 1.5 x span
EGG_RISE_RATIO = 1.5
EGG_AREA_COEF, EGG_RADIUS_COEF = 1.1486, 0.2897  # full egg: A = c B^2, R = c B  # from memory
MANNING_N, TARGET_LOAD_RATIO = 0.013, 0.7  # sized to run at most 70 % full-bore flow
OLD_LATERAL_YEAR, OLD_MIN_MM, MODERN_MIN_MM = 1935, 150, 225

# The loads; town.toml states the same values for the audit. All invented for the demo.
PER_CAPITA_L_DAY, INFILTRATION_L_S_KM = 220.0, 0.2  # wastewater per person, groundwater per km of sewer
DENSITY_PER_HA = {"W": (55.0, 95.0), "E": (34.0, 52.0)}  # persons/ha, far end to outfall end of each tree
IMPERVIOUS_SHARE = {"W": (0.30, 0.50), "E": (0.15, 0.30)}  # terraces and yards; estates with gardens
C_IMPERVIOUS, C_PERVIOUS = 0.9, 0.2  # the audit's defaults for the composite runoff coefficient
IDF_A, IDF_B, IDF_C = 330.0, 6.0, 0.85  # i = a / (t + b)^c [mm/h], t [min]: an invented 2-year storm
INLET_TIME_MIN, ASSUMED_VELOCITY_M_S = 7.0, 2.0  # tc for sizing: inlet time plus travel at this speed
STREET_BLOCK_M = 40.0  # houses either side of the streets: the town is the pipes buffered this far
BREWERY_LOAD_LS, OLD_LATERAL_MM = 100.0, 225  # trade load on an old lateral: overloaded
SILT_GRADE, SILT_LOAD_RATIO = 0.0005, 0.5  # a cul-de-sac spur laid almost level and sized up to match
SILT_MAX_DEPTH_M = 3.3  # its lowered head manhole stays this shallow
SHALLOW_DEPTH_M, LENGTH_TYPO_RATIO, REVERSE_RISE_M = 1.0, 1.4, 0.12
CONCRETE_FROM_MM, PVC_FROM_YEAR = 375, 1975  # material by size and age
SURVEY_COLUMN, SURVEY_MARGIN = 5, 1.05  # flow survey: given flows on a few trunk pipes
CHAMBER_MM = np.array([[300, 525, 750, 10_000], [1050, 1200, 1500, 1800]])  # widest pipe -> chamber


@dataclass(frozen=True)
class Catchment:
    """One catchment: its outfall, trunk direction and development history."""

    zone: str
    outfall_x: float
    direction: float  # +1: trunk runs east from the outfall, -1: west
    columns: int
    first_year: int
    last_year: int
    egg_columns: int = 0
    long_run_column: int = -1
    bank_column: int = -1


CATCHMENTS = (
    Catchment("W", ORIGIN_E, 1.0, 15, 1890, 1965, egg_columns=11, long_run_column=8),
    Catchment("E", ORIGIN_E + TOWN_SPAN_M, -1.0, 12, 1955, 2015, bank_column=2),
)

BANK_X = ORIGIN_E + TOWN_SPAN_M - (CATCHMENTS[1].bank_column + 0.5) * TRUNK_STEP_M  # between two trunk manholes

