"""Findings: problems in the data, gathered for the summary and the findings layer.

A finding is one row: the layer it belongs to, the feature's id, a short code from a fixed
vocabulary, a message with the numbers, and a location (x, y in the working CRS; NaN when the
feature has no usable geometry). Stages add findings in bulk from arrays, so a layer with a
million faulty features costs one DataFrame, not a million Python objects.
"""

from __future__ import annotations

from collections.abc import Iterable, Sequence

import numpy as np
import pandas as pd

COLUMNS = ("layer", "feature", "code", "message", "x", "y")

FINDING_CODES: frozenset[str] = frozenset({
    # reading the layers
    "no_geometry", "wrong_geometry_type", "multipart_line", "multipart_point", "not_a_number", "sentinel_value",
    "nonpositive_size", "not_a_date", "unknown_kind", "missing_id", "duplicate_id", "unknown_shape", "unknown_access",
    # the network, its lengths and levels
    "unknown_node", "unplaced_pipe", "direction_fallback", "reversed_by_inverts", "self_loop", "cycle",
    "separate_components", "outfall", "dangling_end", "orphan_manhole", "drawn_against_flow", "length_mismatch",
    "zero_length", "missing_invert", "invert_below_manhole",
    # design flows
    "flow_split", "loop_flow", "unknown_outlet", "catchment_unplaced", "no_runoff_coefficient", "runoff_out_of_range",
    "tc_not_settled", "catchment_at_outfall",
    # the hydraulic grade line
    "grade_line_break",
    # the settings
    "unusual_setting",
    # writing the outputs
    "field_renamed",
})  # fmt: skip
"""The fixed vocabulary of finding codes; docs/outputs.md ("Finding codes") explains each one."""


class FindingLog:
    """An append-only collection of findings, stored as DataFrame chunks."""

    def __init__(self) -> None:
        self._chunks: list[pd.DataFrame] = []

    def add(
        self,
        layer: str,
        feature: str,
        code: str,
        message: str,
        *,
        x: float = float("nan"),
        y: float = float("nan"),
    ) -> None:
        """Record one finding."""
        self.add_many(layer, [feature], code, [message], x=[x], y=[y])

    def add_many(
        self,
        layer: str,
        features: Sequence[object] | np.ndarray | pd.Series,
        code: str,
        messages: Sequence[str] | np.ndarray | pd.Series | str,
        *,
        x: Iterable[float] | np.ndarray | None = None,
        y: Iterable[float] | np.ndarray | None = None,
    ) -> None:
        """Record one finding per feature; ``messages`` is one string per feature or one for all."""
        if code not in FINDING_CODES:
            raise ValueError(f"finding code {code!r} is not in audit.findings.FINDING_CODES")
        features = np.asarray(features, dtype=object).astype(str)
        count = len(features)
        if count == 0:
            return
        if isinstance(messages, str):
            messages = [messages] * count
        nan = np.full(count, np.nan)
        chunk = pd.DataFrame(
            {
                "layer": layer,
                "feature": features,
                "code": code,
                "message": np.asarray(messages, dtype=object),
                "x": nan if x is None else np.asarray(x, dtype=float),
                "y": nan if y is None else np.asarray(y, dtype=float),
            }
        )
        self._chunks.append(chunk)

    def extend(self, other: FindingLog) -> None:
        """Append every finding of ``other``."""
        self._chunks.extend(other._chunks)

    def to_frame(self) -> pd.DataFrame:
        """All findings as one DataFrame with the columns of ``COLUMNS``."""
        if not self._chunks:
            return pd.DataFrame({name: pd.Series(dtype=object if name in COLUMNS[:4] else float) for name in COLUMNS})
        return pd.concat(self._chunks, ignore_index=True)

    def codes(self) -> dict[str, int]:
        """Count of findings per code."""
        return self.to_frame()["code"].value_counts().to_dict()

    def __len__(self) -> int:
        return sum(len(chunk) for chunk in self._chunks)
