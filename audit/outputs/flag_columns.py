"""One yes/no column per flag beside the joined ``flags`` text, so a GIS filters and styles by a flag without text matching.

``flag_surcharge`` is true where the pipe carries the ``surcharge`` flag. The columns follow the
computed ones, one per code of the fixed vocabulary (``audit.rules.FLAG_CODES`` for pipes,
``MANHOLE_FLAG_CODES`` for manholes), whether or not any feature carries it, so every audit of
every network has the same fields. Where an original field already has the name (ignoring case),
ours is written as ``audit_flag_<code>``.
"""

from __future__ import annotations

from collections.abc import Sequence

import geopandas as gpd
import numpy as np
import pandas as pd

from audit.outputs.descriptions import FLAG_PREFIX
from audit.result import COMPUTED_PREFIX


def with_flag_columns(frame: gpd.GeoDataFrame, flags_field: str | None, codes: Sequence[str]) -> tuple[gpd.GeoDataFrame, dict[str, str]]:
    """The layer with a boolean column per code after its other fields, and the name each code's column got.

    The flags of each distinct ``flags`` text are split once (a network has a few hundred distinct
    combinations at most), so a million pipes cost one factorisation, not a million splits.
    """
    if flags_field is None or flags_field not in frame.columns:
        return frame, {}
    combination, distinct = pd.factorize(frame[flags_field].fillna("").astype(str), sort=False)
    carries = np.array([[code in text.split(";") for code in codes] for text in distinct], dtype=bool).reshape(len(distinct), len(codes))
    taken = {str(field).casefold() for field in frame.columns}
    names = {code: (COMPUTED_PREFIX if f"{FLAG_PREFIX}{code}".casefold() in taken else "") + f"{FLAG_PREFIX}{code}" for code in codes}
    geometry = frame.geometry.name
    columns = {names[code]: carries[combination, place] if len(frame) else np.zeros(0, dtype=bool) for place, code in enumerate(codes)}
    fields = {name: frame[name] for name in frame.columns if name != geometry}
    # the columns side by side as they are: no copy of a million-row layer to add a few yes/no columns
    out = gpd.GeoDataFrame({**fields, **columns, geometry: frame[geometry]}, geometry=geometry, crs=frame.crs, copy=False)
    return out, names
