"""The layers a vector file (or a folder of them) holds: name, geometry type, CRS, count, fields.

Read from the files' metadata only (``pyogrio.read_info``); a layer whose file does not say its
geometry type is typed from its first features.
"""

from __future__ import annotations

from dataclasses import dataclass
from pathlib import Path

import pyogrio

from audit.errors import InputError
from audit.layers import quiet_measures

VECTOR_SUFFIXES = (".gpkg", ".shp", ".geojson", ".json", ".fgb")


@dataclass(frozen=True)
class LayerInfo:
    """One layer of a vector file, as listed by the reader."""

    path: Path
    name: str
    geometry_type: str
    crs: str | None
    features: int
    fields: tuple[tuple[str, str], ...]

    @property
    def kind(self) -> str:
        """``line``, ``point``, ``polygon`` or ``other``, from the geometry type."""
        lowered = self.geometry_type.lower()
        return next((kind for kind in ("line", "point", "polygon") if kind in lowered), "other")

    @property
    def names(self) -> list[str]:
        """The field names, in order."""
        return [name for name, _ in self.fields]


def _sources(path: Path) -> list[Path]:
    if not path.exists():
        raise InputError(f"{path}: file not found")
    if path.is_dir():
        found = sorted(item for item in path.iterdir() if item.suffix.lower() in VECTOR_SUFFIXES)
        if not found:
            raise InputError(f"{path}: the folder holds no vector file ({', '.join(VECTOR_SUFFIXES)})")
        return found
    return [path]


def _geometry_type(path: Path, layer: str, listed: str) -> str:
    """The listed geometry type, or that of the first features when the file does not say."""
    if listed.lower() not in ("unknown", "none", ""):
        return listed
    frame = pyogrio.read_dataframe(path, layer=layer, max_features=50, columns=[])
    kinds = frame.geometry.dropna().geom_type
    return str(kinds.mode().iloc[0]) if len(kinds) else "no geometry"


def describe(path: Path) -> list[LayerInfo]:
    """List every layer of a file (or of the vector files in a folder).

    Raises
    ------
    InputError
        The path is missing, not a vector file, or holds no layer.
    """
    layers = []
    for source in _sources(path):
        try:
            with quiet_measures():
                for name, listed in pyogrio.list_layers(source):
                    info = pyogrio.read_info(source, layer=name)
                    fields = tuple(zip(map(str, info["fields"]), map(str, info["dtypes"]), strict=True))
                    kind = _geometry_type(source, str(name), str(listed))
                    layers.append(LayerInfo(source, str(name), kind, info["crs"], int(info["features"]), fields))
        except (OSError, RuntimeError, ValueError) as error:
            raise InputError(f"{source}: not a readable vector file ({error})") from None
    if not layers:
        raise InputError(f"{path}: holds no vector layer")
    return layers
