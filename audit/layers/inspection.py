"""``sewer-audit inspect``: describe the layers of a file and write a starter config.

The layer roles (pipes are lines, manholes are points) and the field mappings are guesses
from simple name rules of this project; every guess in the starter config is marked
``check this``. An existing config file is never overwritten.
"""

from __future__ import annotations

import argparse
import json
import os
import re
from collections.abc import Sequence
from dataclasses import dataclass
from pathlib import Path

import pyogrio

from audit.errors import InputError
from audit.layers.reading import quiet_measures
from audit.layers.settings import MANHOLE_UNITS, PIPE_UNITS

VECTOR_SUFFIXES = (".gpkg", ".shp", ".geojson", ".json", ".fgb")
LINE_NAMES = re.compile(r"pipe|sewer|main|conduit|link|line|drain")
POINT_NAMES = re.compile(r"manhole|mh|node|chamber|structure|junction|point")
UP = r"_(us|up|upstream|from|start|u)"
DOWN = r"_(ds|dn|down|downstream|to|end|d)"
LEVEL = r"(inv|il_|level|lvl)"
NODE = r"(mh|node|manhole|chamber|_id_|id_$|ref|_n_)"

# Guessing rules of this project: canonical key -> patterns that must all match "_<name>_"
# (lower case, runs of other characters as "_"). The first key listed claims a field first.
PIPE_RULES: tuple[tuple[str, tuple[str, ...]], ...] = (
    ("upstream_invert", (UP, LEVEL)),
    ("downstream_invert", (DOWN, LEVEL)),
    ("from_node", (UP, NODE)),
    ("to_node", (DOWN, NODE)),
    ("diameter", (r"dia|bore|size",)),
    ("height", (r"height|hgt|_ht_",)),
    ("width", (r"width|wid",)),
    ("shape", (r"shape|section|profile",)),
    ("length", (r"len",)),
    ("roughness", (r"rough|manning|_ks_|_n_",)),
    ("material", (r"mat",)),
    ("install_year", (r"year|_yr|install|laid|built",)),
    ("flow", (r"flow|_q_|discharge",)),
    ("id", (r"_id_|id_$|ref|^_fid_$|asset",)),
)
MANHOLE_RULES: tuple[tuple[str, tuple[str, ...]], ...] = (
    ("rim", (r"rim|cover_?l|_cl_|ground|_gl_|_top",)),
    ("invert", (LEVEL,)),
    ("depth", (r"depth|_dep",)),
    ("inflow", (r"inflow|load|flow",)),
    ("access", (r"access|lid|hatch",)),
    ("id", (r"_id_|id_$|ref|name|asset",)),
)
UNIT_RULES: tuple[tuple[str, str, str], ...] = (
    ("length", r"_?mm_", "mm"), ("length", r"_in_|inch", "in"), ("length", r"_?ft_|feet", "ft"),
    ("length", r"_m_", "m"), ("flow", r"_?(ls|lps)_", "l/s"), ("flow", r"_?cfs_", "cfs"),
    ("flow", r"_?gpm_", "gpm"), ("flow", r"_?mgd_", "MGD"), ("flow", r"m3s|cumec", "m3/s"),
)  # fmt: skip


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
        """``line``, ``point`` or ``other``, from the geometry type."""
        lowered = self.geometry_type.lower()
        return "line" if "line" in lowered else "point" if "point" in lowered else "other"


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


def _pick(layers: Sequence[LayerInfo], kind: str, names: re.Pattern[str]) -> LayerInfo | None:
    candidates = [layer for layer in layers if layer.kind == kind]
    named = [layer for layer in candidates if names.search(layer.name.lower())]
    found = named or candidates
    return found[0] if found else None


def guess_roles(layers: Sequence[LayerInfo]) -> tuple[LayerInfo | None, LayerInfo | None]:
    """The layers that look like the pipes (lines) and the manholes (points)."""
    return _pick(layers, "line", LINE_NAMES), _pick(layers, "point", POINT_NAMES)


def _padded(name: str) -> str:
    return "_" + re.sub(r"[^a-z0-9]+", "_", name.lower()).strip("_") + "_"


def guess_fields(names: Sequence[str], *, role: str) -> dict[str, str]:
    """Guess ``canonical key -> field name`` from field names; each field is used once.

    >>> guess_fields(["PIPE_ID", "US_IL", "DS_IL", "DIA_MM", "US_MH"], role="pipes")
    {'upstream_invert': 'US_IL', 'downstream_invert': 'DS_IL', 'from_node': 'US_MH', 'diameter': 'DIA_MM', 'id': 'PIPE_ID'}
    """
    rules = PIPE_RULES if role == "pipes" else MANHOLE_RULES
    guesses: dict[str, str] = {}
    for key, patterns in rules:
        free = [name for name in names if name not in guesses.values()]
        match = next((n for n in free if all(re.search(p, _padded(n)) for p in patterns)), None)
        if match is not None:
            guesses[key] = match
    return guesses


def guess_unit(name: str, *, quantity: str) -> str | None:
    """A unit written into a field name (``DIA_MM`` -> ``mm``), or None.

    >>> guess_unit("FLOW_LPS", quantity="flow"), guess_unit("US_IL", quantity="length")
    ('l/s', None)
    """
    return next((unit for kind, pattern, unit in UNIT_RULES if kind == quantity and re.search(pattern, _padded(name))), None)


def _quote(text: str) -> str:
    return json.dumps(text)


def _layer_table(key: str, layer: LayerInfo, folder: Path) -> list[str]:
    relative = Path(os.path.relpath(layer.path.resolve(), folder.resolve())).as_posix()
    lines = [f"[{key}]", f"path = {_quote(relative)}", f"layer = {_quote(layer.name)}  # check this: guessed {key} layer"]
    if layer.crs is None:
        lines.append('# crs = "EPSG:...."  # required: the layer has no CRS; give the one it was drawn in')
    guesses = guess_fields([name for name, _ in layer.fields], role=key)
    lines.append(f"\n[{key}.fields]  # canonical name = your field name")
    lines += [f"{canonical} = {_quote(field)}  # check this" for canonical, field in guesses.items()]
    lines.append(f"\n[{key}.units]  # defaults shown commented out; uncomment and change to match your data")
    for canonical, (quantity, default) in (PIPE_UNITS if key == "pipes" else MANHOLE_UNITS).items():
        unit = guess_unit(guesses[canonical], quantity=quantity) if canonical in guesses else None
        lines.append(f"{canonical} = {_quote(unit)}  # check this: read from the field name" if unit
                     else f"# {canonical} = {_quote(default)}")  # fmt: skip
    return lines


def starter_config(pipes: LayerInfo, manholes: LayerInfo | None, *, folder: Path) -> str:
    """The text of a starter TOML config for these layers, with paths relative to ``folder``."""
    lines = ["# Starter config written by `sewer-audit inspect`; see docs/config.md for every key.",
             "# Lines marked 'check this' are guesses from the field names.", "",
             "[input]", '# engine = "pyogrio"', "# sentinels = [-9999, -999]", ""]  # fmt: skip
    lines += _layer_table("pipes", pipes, folder)
    if manholes is not None:
        lines += ["", *_layer_table("manholes", manholes, folder)]
    lines += ["", "[network]", "# snap_tolerance_m = 1.0", '# direction = "ids"',
              "", "[hydraulics]", '# formula = "manning"', "# manning_n = 0.013", ""]  # fmt: skip
    return "\n".join(lines)


def _summary(layers: Sequence[LayerInfo], pipes: LayerInfo | None, manholes: LayerInfo | None) -> str:
    lines = []
    for layer in layers:
        role = "  <- pipes?" if layer is pipes else "  <- manholes?" if layer is manholes else ""
        crs = layer.crs or "none"
        lines.append(f"{layer.path.name}: layer '{layer.name}': {layer.geometry_type}, "
                     f"{layer.features} features, CRS {crs}{role}")  # fmt: skip
        lines += [f"    {name}: {kind}" for name, kind in layer.fields]
    return "\n".join(lines)


def _default_target(path: Path) -> Path:
    return path / f"{path.name}.audit.toml" if path.is_dir() else path.with_name(f"{path.stem}.audit.toml")


def inspect_path(path: Path, *, config_out: Path | None = None) -> str:
    """Describe ``path`` and write a starter config; return the text to show the user.

    The config goes to ``config_out`` (default ``<stem>.audit.toml`` beside the file) and is
    never written over an existing file.
    """
    layers = describe(path)
    pipes, manholes = guess_roles(layers)
    lines = [_summary(layers, pipes, manholes), ""]
    target = config_out or _default_target(path)
    if pipes is None:
        lines.append("No line layer found, so no starter config was written: pipes must be lines.")
    elif target.exists():
        lines.append(f"{target} exists and was left unchanged; choose another file with --config-out.")
    else:
        target.write_text(starter_config(pipes, manholes, folder=target.parent), encoding="utf-8")
        lines.append(f"Wrote the starter config {target}; check every line marked 'check this'.")
    return "\n".join(lines)


def inspect_command(args: argparse.Namespace) -> int:
    """Run ``sewer-audit inspect``; bad input raises InputError, which the CLI turns into exit 1."""
    config_out = Path(args.config_out) if args.config_out else None
    print(inspect_path(Path(args.path), config_out=config_out))
    return 0
