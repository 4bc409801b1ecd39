"""Risk scores on a table of pipes written here, each score worked out by hand in the comments.

Default bands (docs/renewal.md): load ratio 0.5 / 0.8 / 1.0 / 1.5; age over service life
0.25 / 0.5 / 0.75 / 1.0; population 100 / 1000 / 10000 / 50000; size 0.3 / 0.6 / 0.9 / 1.5 m;
depth 1.5 / 3 / 5 / 8 m. A value on an edge takes the band above it. Service lives (from
memory, the defaults): PVC 80 years, brick 100. Ages are counted to 2025.
"""

from dataclasses import replace
from types import MappingProxyType

import numpy as np
import shapely

from audit.renewal import Condition, CriticalAreas, combine, renewal_programme

from ._network import programme_inputs

NAN = np.nan


def table_of_pipes() -> dict[str, object]:
    # pipe:        A       B        C        D        E        F        G
    inputs = programme_inputs(
        7,
        load_ratio=[0.9, 0.3, 1.2, NAN, NAN, 0.7, 1.0],
        evaluated=[True, True, True, False, False, True, True],
        install_year=[1995, 1905, 2000, NAN, NAN, 2015, 2015],
        material=["PVC", "BRICK", "PVC", "PVC", "PVC", "PVC", "PVC"],
        population_served=[50, 20000, 500, NAN, NAN, 150, 1000],
        height=[0.225, 0.6, 1.2, 0.3, NAN, 0.3, 0.45],
        up_depth_m=[1.2, 1.0, 9.0, NAN, NAN, 3.0, 4.0],
        down_depth_m=[2.0, 0.8, 8.5, NAN, NAN, 2.0, 3.5],
        flags=["near_capacity", "", "surcharge", "", "", "backwater_surcharge", "near_capacity"],
    )
    inputs["node_flooding"][5] = True  # the node pipe C flows into (2 x 2 + 1)
    inputs["condition"] = Condition(np.array(["P2", "P4", "P7"], dtype=object), np.array([3.0, 4.0, 4.0]), np.array([2.0, NAN, NAN]), "test")
    # a railway around pipe D (drawn from x = 300 to 350 m)
    inputs["critical_areas"] = CriticalAreas(("railway",), (5,), (None,), np.array([0]), np.array([shapely.box(290, -10, 360, 10)], dtype=object))
    return inputs


def test_risk_scores_of_the_table_of_pipes() -> None:
    programme = renewal_programme(**table_of_pipes())
    # A: load ratio 0.9 -> 3; age 30 / 80 = 0.375 -> 2                    L = 3 (load ratio)
    #    population 50 -> 1; size 0.225 -> 1; depth max(1.2, 2.0) = 2.0 -> 2      C = 2 (depth)      R = 6
    # B: load ratio 0.3 -> 1; age 120 / 100 = 1.2 -> 5, weighted 0.8 (the default): ceil(4.0) = 4;
    #    structural 3; service 2                                                    L = 4 (age)
    #    population 20000 -> 4; size 0.6 (an edge) -> 3; depth 1.0 -> 1           C = 4 (population) R = 16
    # C: load ratio 1.2 -> 4, its node below floods -> 5; age 25 / 80 -> 2        L = 5 (flooding downstream)
    #    population 500 -> 2; size 1.2 -> 4; depth 9.0 -> 5                       C = 5 (depth)      R = 25
    # D: not evaluated; no year; structural 4                                      L = 4 (structural grade)
    #    size 0.3 (an edge) -> 2; within the railway (consequence 5)               C = 5 (railway)    R = 20
    # E: nothing known                                                             not scored
    # F: load ratio 0.7 -> 2, backwater -> the band of 1.0 = 4; age 10 / 80 -> 1   L = 4 (backwater)
    #    population 150 -> 2; size 0.3 -> 2; depth 3.0 (an edge) -> 3              C = 3 (depth)      R = 12
    # G: load ratio 1.0 (an edge) -> 4, structural 4: a tie, hydraulic first       L = 4 (load ratio)
    #    population 1000 (an edge) -> 3; size 0.45 -> 2; depth 4.0 -> 3: a tie     C = 3 (population) R = 12
    np.testing.assert_array_equal(programme.likelihood, [3, 4, 5, 4, NAN, 4, 4])
    np.testing.assert_array_equal(programme.consequence, [2, 4, 5, 5, NAN, 3, 3])
    np.testing.assert_array_equal(programme.risk, [6, 16, 25, 20, NAN, 12, 12])
    assert programme.likelihood_driver.tolist() == ["load ratio", "age", "flooding downstream", "structural grade", "", "backwater", "load ratio"]
    assert programme.consequence_driver.tolist() == ["depth", "population", "depth", "critical area: railway", "", "depth", "population"]
    assert programme.risk_driver[3] == "structural grade x critical area: railway"
    assert programme.remedy[4] == ("risk not scored: no load ratio, install year or condition grade for the likelihood; "
                                   "no population, size, depth, flooding or critical area for the consequence")  # fmt: skip


def test_weights_scale_a_part_before_the_largest_is_taken() -> None:
    inputs = table_of_pipes()
    weights = MappingProxyType({"critical_area": 1.0, "population": 0.5, "size": 1.0, "depth": 0.0, "flooding": 1.0})
    inputs["settings"] = replace(inputs["settings"], consequence_weights=weights)
    programme = renewal_programme(**inputs)
    # B: population 4 x 0.5 = 2; size 3; depth left out                 C = 3 (size)
    # C: population 2 x 0.5 = 1; size 4; depth left out                 C = 4 (size)
    # G: population 3 x 0.5 = 1.5, rounded up to 2; size 2: a tie       C = 2 (population)
    assert programme.consequence[[1, 2, 6]].tolist() == [3.0, 4.0, 2.0]
    assert programme.consequence_driver[[1, 2, 6]].tolist() == ["size", "size", "population"]


def test_combine_leaves_unknown_parts_out() -> None:
    score, which = combine([np.array([NAN, 2.0, 5.0]), np.array([NAN, NAN, 5.0])], [1.0, 1.0])
    assert np.isnan(score[0])
    assert score[1:].tolist() == [2.0, 5.0]
    assert which.tolist() == [-1, 0, 0]  # on a tie the first part drives
