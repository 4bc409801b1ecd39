"""Inputs of ``renewal_programme`` for small networks written in the tests: every pipe its own
column, defaults for what a test does not set."""

from typing import Any

import numpy as np
import shapely

from audit.findings import FindingLog
from audit.hydraulics import Friction, PipeHydraulics, PipeSections
from audit.renewal import CleansingCriterion, RenewalSettings


def programme_inputs(count: int, **given: Any) -> dict[str, Any]:
    """Keyword arguments for ``renewal_programme``: pipe ``i`` runs from node ``2i`` to node ``2i + 1``
    and is drawn from (100 i, 0) to (100 i + 50, 0) unless ``upstream``, ``downstream`` or ``geometry`` say otherwise.

    Sizes and slopes go in as ``height`` [m] and ``slope``; a Manning n of 0.013 throughout.
    """
    height = np.asarray(given.pop("height", np.full(count, 0.3)), dtype=float)
    slope = np.asarray(given.pop("slope", np.full(count, 0.003)), dtype=float)
    length = np.asarray(given.pop("length", np.full(count, 50.0)), dtype=float)
    sections = PipeSections.from_names(["circular"] * count, height, height)
    pipes = PipeHydraulics(sections, slope, Friction.uniform("manning", 0.013, count), length)
    nodes = 2 * count
    x = 100.0 * np.arange(count)
    inputs: dict[str, Any] = {
        "pipes": pipes,
        "flags": np.full(count, "", dtype=object),
        "severity": np.full(count, "", dtype=object),
        "q_design": np.full(count, 0.01),
        "load_ratio": np.full(count, np.nan),
        "population_served": np.full(count, np.nan),
        "install_year": np.full(count, np.nan),
        "material": np.full(count, "PVC", dtype=object),
        "up_depth_m": np.full(count, np.nan),
        "down_depth_m": np.full(count, np.nan),
        "upstream": 2 * np.arange(count),
        "downstream": 2 * np.arange(count) + 1,
        "node_flooding": np.zeros(nodes, dtype=bool),
        "geometry": shapely.linestrings(np.stack([np.stack([x, np.zeros(count)], axis=1), np.stack([x + 50.0, np.zeros(count)], axis=1)], axis=1)),
        "pipe_ids": np.array([f"P{place + 1}" for place in range(count)], dtype=object),
        "cleansing": CleansingCriterion("full_velocity", 0.6, None, 0.15, "flowing full"),
        "evaluated": np.ones(count, dtype=bool),
        "settings": RenewalSettings(assessment_year=2025),
        "condition": None,
        "critical_areas": None,
        "findings": FindingLog(),
    }
    for name, value in given.items():
        assert name in inputs, name
        inputs[name] = np.asarray(value, dtype=object if isinstance(inputs[name], np.ndarray) and inputs[name].dtype == object else None) \
            if isinstance(inputs[name], np.ndarray) else value  # fmt: skip
    return inputs
