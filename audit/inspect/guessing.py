"""Guess the field mapping and the units of one layer, and say why, for ``sewer-audit inspect``.

Names first: a field name is split into words (``UpstreamInvert`` -> ``upstream invert``,
``usil`` -> ``us il``) and tried against the name rules of this project, which give each
canonical key its candidates in rank order. Values decide: a candidate must hold what the key
needs (numbers, dates or years, a handful of codes), the node fields are chosen by how many pipe
ends name a manhole (:mod:`audit.inspect.matching`), and the kind and shape fields by how many
features hold a code the word rules know (:mod:`audit.inspect.codes`).

Units:

* levels, depths and lengths from the CRS's linear unit (its vertical axis where it has one);
* sizes from the median of the positive values: below 4 metres or feet (the CRS says which),
  about 4 to 120 inches, about 100 to 3,000 millimetres;
* flows by comparing the flow with the pipe's full-bore area: a design flow divided by the area
  is a velocity, and above about 3 m/s it is implausible, so the largest unit of the register's
  system (metric or US customary) that keeps the median below 3 m/s is taken.

A unit written in the field name (``DIA_MM``, ``Q_CFS``) wins over all of these.
"""

from __future__ import annotations

import math
import re
from collections.abc import Mapping, Sequence
from dataclasses import dataclass, field

import numpy as np
import pyproj

from audit.inspect.codes import NODE_KIND_WORDS, PIPE_KIND_WORDS, SHAPE_WORDS, CodeGuess, WordRule, code_table, known_share
from audit.inspect.profiling import MOSTLY, SENTINEL_LIKE, FieldValues, LayerValues, code_counts, numbers
from audit.layers import CATCHMENT_FIELDS, MANHOLE_FIELDS, MANHOLE_UNITS, PIPE_FIELDS, PIPE_UNITS, InputOptions
from audit.units import FLOW_FACTORS, FOOT_M, LENGTH_FACTORS

US_SURVEY_FOOT_M = 1200 / 3937  # Source: NIST SP 811 (2008), appendix B: 1 US survey foot = 1200/3937 m
MAX_CODES = 50
"""A field with more distinct values is free text, not a code (a rule of this project)."""
ZERO_SHARE = 0.01
"""Zeros in at least this share of a field's values are frequent (a rule of this project)."""
MAX_DESIGN_VELOCITY_M_S = 3.0
"""Flow / full-bore area above this is no design flow: scour limits sit near 2.5 to 3 m/s (common practice, no source)."""

UP = frozenset({"us", "u", "up", "ups", "upstream", "upst", "from", "fr", "start", "begin", "beg", "upper", "1"})
DOWN = frozenset({"ds", "d", "dn", "dwn", "down", "downstream", "dnst", "to", "end", "lower", "2"})
NODE = frozenset({"mh", "node", "manhole", "chamber", "struct", "structure", "junction", "nd", "id", "no", "ref", "num", "nr"})
LEVEL = frozenset({"il", "ie", "inv", "invert", "elev", "elevation", "el", "lvl", "level", "lev"})
DEPTH = frozenset({"depth", "dep", "dpth", "dp"})
KIND = frozenset({"type", "kind", "class", "use", "usage", "function", "category", "status", "service", "system", "purpose",
                  "owner", "ownership"})  # fmt: skip
NOT_INSTALL = frozenset({"inspect", "inspected", "insp", "edit", "edited", "update", "updated", "modified", "survey",
                         "surveyed", "created", "last", "cctv", "clean", "cleaned", "rehab", "lined", "lining", "renewed"})  # fmt: skip
SYSTEM_IDS = frozenset({"global", "guid", "object", "objectid", "oid", "fid"})
AREA_UNITS = frozenset({"m2", "sqm", "sqft", "ac", "acre", "acres", "km2", "sqkm"})
_SIDE_PREFIXES = ("upstream", "downstream", "from", "down", "us", "ds", "up", "dn", "to")


@dataclass(frozen=True)
class Guess:
    """A guessed value (a field name or a unit) and the reason the user reads."""

    value: str
    reason: str


@dataclass(frozen=True)
class NameRule:
    """Names that make a field a candidate for ``key``.

    A name is a candidate when one of its words is in ``words`` or starts with one of
    ``starts`` (or, with ``together``, holds all of those words), it names the end ``side``
    (``up``, ``down``, or None: no matter), and none of its words is in ``avoid``. ``need`` is
    what its values must be: ``number``, ``fraction`` (a number, median at most 1: not a
    percentage), ``date``, ``code``, ``flag``, ``id`` (nearly all distinct) or ``any``.
    """

    key: str
    need: str
    words: frozenset[str] = frozenset()
    starts: tuple[str, ...] = ()
    together: frozenset[str] = frozenset()
    side: str | None = None
    avoid: frozenset[str] = frozenset()

    def names(self, name: str) -> bool:
        """Whether the field name ``name`` is a candidate."""
        found = words_of(name)
        said = bool(found & self.words) or any(word.startswith(self.starts) for word in found if self.starts)
        said = said or (bool(self.together) and self.together <= found)
        return said and (self.side is None or side_of(name) == self.side) and not found & self.avoid


def _rule(key: str, need: str, words: str, *, starts: tuple[str, ...] = (), together: frozenset[str] = frozenset(),
          avoid: frozenset[str] = frozenset()) -> NameRule:  # fmt: skip
    """A :class:`NameRule` with its words written as one string."""
    return NameRule(key, need, frozenset(words.split()), starts=starts, together=together, avoid=avoid)


PIPE_RULES: tuple[NameRule, ...] = (
    NameRule("upstream_depth", "number", DEPTH, side="up"),
    NameRule("downstream_depth", "number", DEPTH, side="down"),
    NameRule("upstream_invert", "number", LEVEL, starts=("inv", "elev"), side="up", avoid=DEPTH),
    NameRule("downstream_invert", "number", LEVEL, starts=("inv", "elev"), side="down", avoid=DEPTH),
    _rule("diameter", "number", "dia diam diameter bore size sz", starts=("diam",)),
    _rule("height", "number", "height hgt ht rise h", avoid=DEPTH),
    _rule("width", "number", "width wid wdth span w"),
    _rule("side_slope", "number", "batter sideslope", together=frozenset({"side", "slope"})),
    _rule("length", "number", "length len lgth lngth leng", starts=("length",), avoid=frozenset({"shape"})),
    _rule("roughness", "number", "rough roughness manning mannings mann ks n friction"),
    _rule("material", "any", "material mat matl mtl", starts=("mater",)),
    _rule("install_year", "date", "install installed inst instal laid built constructed construction constr commissioned",
          avoid=NOT_INSTALL),
    _rule("install_year", "date", "year yr date", avoid=NOT_INSTALL),
    _rule("flow", "number", "flow q discharge dwf adwf pdwf pwwf qdes", avoid=frozenset({"dir", "direction", "type"})),
    _rule("id", "id", "id ref no num number nr asset uid key tag", avoid=UP | DOWN | SYSTEM_IDS),
    _rule("id", "id", "id guid fid oid objectid", avoid=UP | DOWN),
)  # fmt: skip
"""Pipe name rules in claiming order: a field claimed by an earlier key is not offered to a later one."""

MANHOLE_RULES: tuple[NameRule, ...] = (
    _rule("rim", "number", "rim cover cl ground gl grnd top surface tol lid sl", starts=("rim",), avoid=DEPTH | {"access"}),
    _rule("invert", "number", "inv invert il ie sump bottom", avoid=DEPTH),
    _rule("rim", "number", "elev elevation level lev z", avoid=DEPTH),
    NameRule("depth", "number", DEPTH),
    _rule("point_load", "number", "pointload trade industrial", together=frozenset({"point", "load"})),
    _rule("inflow", "number", "inflow load flow q dwf adwf", avoid=frozenset({"dir", "direction", "type"})),
    _rule("population", "number", "pop population persons people pe inhabitants residents", starts=("popul",)),
    _rule("access", "flag", "access accessible hatch lid"),
)
"""Manhole name rules in claiming order (the id and the kind are chosen by their values)."""

CATCHMENT_RULES: tuple[NameRule, ...] = (
    _rule("population", "number", "pop population persons people pe inhabitants residents", starts=("popul",)),
    _rule("dwellings", "number", "dwell dwellings dwelling houses homes units properties households hh lots"),
    _rule("occupancy", "number", "occupancy occ pph"),
    _rule("area_ha", "number", "area ha hectares hect", avoid=AREA_UNITS | {"shape"}),
    _rule("runoff_coefficient", "fraction", "runoff c coeff coef rc", avoid=frozenset({"cn"})),
    _rule("impervious_fraction", "fraction", "imperv impervious imp paved pimp", starts=("imperv",)),
    _rule("id", "id", "id ref no num number nr name code key", avoid=SYSTEM_IDS),
    _rule("id", "id", "id guid fid oid objectid"),
)
"""Catchment name rules in claiming order (``drains_to`` is chosen by its values)."""

NODE_ENDS = NameRule("node", "any", NODE - {"id", "no", "ref", "num", "nr"}, avoid=LEVEL | DEPTH)
"""Pipe fields that name a node without saying which end (``NODE_A``); a bare id is the pipe's own."""
MANHOLE_IDS = (_rule("id", "id", "id ref no num number nr name code key tag asset", avoid=SYSTEM_IDS),
               NameRule("id", "id", NODE | {"name"}), _rule("id", "id", "id guid fid oid objectid"))  # fmt: skip
"""Manhole id candidates, best names first."""
OUTLETS = _rule("drains_to", "any", "drain drains drainsto outlet outfall to node mh manhole receiving connect connection discharge dest")
KIND_RULE = NameRule("kind", "code", KIND | {"structure", "struct", "feature", "subtype"}, avoid=frozenset({"material", "mat", "shape"}))
SHAPE_RULE = _rule("shape", "code", "shape section sect profile form xsec xsection", avoid=frozenset({"length", "leng", "len", "area"}))

ORDER: Mapping[str, tuple[str, ...]] = {"pipes": PIPE_FIELDS, "manholes": MANHOLE_FIELDS, "catchments": CATCHMENT_FIELDS}
RULES: Mapping[str, tuple[NameRule, ...]] = {"pipes": PIPE_RULES, "manholes": MANHOLE_RULES, "catchments": CATCHMENT_RULES}
UNIT_RULES: tuple[tuple[str, str, str], ...] = (
    ("length", r"_?mm_", "mm"), ("length", r"_in_|inch", "in"), ("length", r"_?ft_|feet", "ft"),
    ("length", r"_m_", "m"), ("flow", r"_?(ls|lps)_", "l/s"), ("flow", r"_?cfs_", "cfs"),
    ("flow", r"_?gpm_", "gpm"), ("flow", r"_?mgd_", "MGD"), ("flow", r"m3s|cumec", "m3/s"),
)  # fmt: skip
"""A unit written in a field name: (quantity, pattern over ``_name_``, unit)."""
SIZES = ("diameter", "height", "width")
LEVELS = ("upstream_invert", "downstream_invert", "rim", "invert")
NOT_NUMBERS = frozenset({"id", "from_node", "to_node", "drains_to", "kind", "shape", "material", "access"})
"""Keys whose values are names or codes, even where a register types them as numbers."""
NOT_ZERO = frozenset({"diameter", "height", "width", "length", "upstream_depth", "downstream_depth", "depth", "install_year",
                      "area_ha", "occupancy"})  # fmt: skip
"""Keys whose value cannot be 0 (a size, a depth, a year)."""


def _split(name: str) -> str:
    return re.sub(r"(?<=[a-z0-9])(?=[A-Z])|(?<=[A-Z])(?=[A-Z][a-z])", "_", name)


def _padded(name: str) -> str:
    return "_" + re.sub(r"[^a-z0-9]+", "_", _split(name).lower()).strip("_") + "_"


def words_of(name: str) -> frozenset[str]:
    """The words of a field name, a run-on end and subject also split (``usil`` -> ``us``, ``il``).

    >>> sorted(words_of("UpstreamInvert")), sorted(words_of("usil")), sorted(words_of("NODE1"))
    (['invert', 'upstream'], ['il', 'us', 'usil'], ['1', 'node'])
    """
    found: set[str] = set()
    for word in re.findall(r"[a-z]+|[0-9]+", _split(name).lower()):
        found.add(word)
        for prefix in _SIDE_PREFIXES:
            rest = word[len(prefix):]
            if word.startswith(prefix) and rest in NODE | LEVEL | DEPTH:
                found |= {prefix, rest}
                break
    return frozenset(found)


def side_of(name: str) -> str | None:
    """``up`` or ``down`` when the name says which end of the pipe it belongs to, else None.

    >>> side_of("US_MH"), side_of("ToNode"), side_of("INV_2"), side_of("DIAMETER")
    ('up', 'down', 'down', None)
    """
    found = words_of(name)
    up, down = bool(found & UP), bool(found & DOWN)
    return "up" if up and not down else "down" if down and not up else None


def guess_unit(name: str, *, quantity: str) -> str | None:
    """A unit written into a field name (``DIA_MM`` -> ``mm``), or None.

    >>> guess_unit("FLOW_LPS", quantity="flow"), guess_unit("US_IL", quantity="length")
    ('l/s', None)
    """
    return next((unit for kind, pattern, unit in UNIT_RULES if kind == quantity and re.search(pattern, _padded(name))), None)


def _fits(need: str, values: FieldValues | None) -> bool:
    if values is None:
        return True
    if values.filled == 0:
        return False
    fits = {
        "number": values.numeric,
        "date": values.date_share >= MOSTLY,
        "code": values.distinct <= MAX_CODES,
        "flag": values.kind == "other" or values.distinct <= 6,
        "id": values.kind in ("text", "number") and values.distinct >= MOSTLY * values.filled,
        "fraction": values.numeric and not values.median > 1,
    }
    return fits.get(need, values.kind in ("text", "number", "date"))


def _described(need: str, values: FieldValues | None) -> str:
    """What the values of a field show, for a reason."""
    if values is None:
        return ""
    if need == "date":
        kind = "a date field" if values.kind == "date" else f"{100 * values.date_share:.0f} % of its values are dates or years"
        return f"; {kind}"
    if values.numeric and need in ("number", "fraction") and not math.isnan(values.median):
        return f"; median {values.median:g}"
    return f"; {values.distinct} distinct values in {values.filled} features"


def candidates(names: Sequence[str], rules: Sequence[NameRule], values: LayerValues | None = None) -> list[str]:
    """Fields that any of ``rules`` names and whose values fit, best rule first, then in layer order."""
    found = [name for rule in rules for name in names if rule.names(name) and _fits(rule.need, _values(values, name))]
    return list(dict.fromkeys(found))


def _values(values: LayerValues | None, name: str) -> FieldValues | None:
    return None if values is None else values.fields.get(name)


def guess_fields(names: Sequence[str], *, role: str, values: LayerValues | None = None,
                 fixed: Mapping[str, Guess] | None = None) -> dict[str, Guess]:  # fmt: skip
    """Guess ``canonical key -> field`` from the names (and, where read, the values); each field is used once.

    ``fixed`` holds keys already decided (the node fields, the kind field); their fields are
    not offered to any other key.

    >>> {key: guess.value for key, guess in guess_fields(["PIPE_ID", "US_IL", "DS_IL", "DIA_MM"], role="pipes").items()}
    {'upstream_invert': 'US_IL', 'downstream_invert': 'DS_IL', 'diameter': 'DIA_MM', 'id': 'PIPE_ID'}
    """
    guesses = dict(fixed or {})
    taken = {guess.value for guess in guesses.values()}
    for rule in RULES[role]:
        if rule.key in guesses:
            continue
        for name in names:
            found = _values(values, name)
            if name not in taken and rule.names(name) and _fits(rule.need, found):
                guesses[rule.key] = Guess(name, f"named like {rule.key.replace('_', ' ')}{_described(rule.need, found)}")
                taken.add(name)
                break
    return guesses


@dataclass(frozen=True)
class CodeField:
    """A kind or shape field, its codes with their guesses, and the other candidates weighed."""

    key: str
    field: str
    table: list[CodeGuess]
    reason: str


def guess_code_field(names: Sequence[str], values: LayerValues, *, rule: NameRule, vocabulary: Sequence[WordRule],
                     taken: set[str]) -> CodeField | None:  # fmt: skip
    """The candidate field of ``rule`` whose codes the word rules know for the most features.

    Names order the candidates; the share of features with a known code decides. A field none
    of whose codes is known is no kind or shape field (None when no candidate has one).
    """
    weighed = []
    for name in candidates([n for n in names if n not in taken], [rule], values):
        table = code_table(code_counts(values.column(name)), vocabulary)
        weighed.append((known_share(table, features=values.count), name, table))
    if not weighed or max(share for share, _, _ in weighed) == 0:
        return None
    share, name, table = max(weighed, key=lambda item: item[0])  # the first (best name) among equals
    others = "".join(f"; {other} {100 * s:.0f} %" for s, other, _ in weighed if other != name)
    reason = f"{100 * share:.0f} % of features hold a code the word rules know ({len(table)} codes){others}"
    return CodeField(rule.key, name, table, reason)


def _crs_unit(name: str, factor: float, *, what: str) -> Guess | None:
    """``m`` or ``ft`` from the unit of one CRS axis (``name``), by its factor to metres [m/unit]."""
    unit = f"{what} unit is {name}"
    if math.isclose(factor, 1.0):
        return Guess("m", unit)
    if math.isclose(factor, US_SURVEY_FOOT_M, rel_tol=1e-9):
        return Guess("ft", f"{unit} (taken as ft: the two feet differ by 2 parts per million)")
    if math.isclose(factor, FOOT_M, rel_tol=1e-9):
        return Guess("ft", unit)
    return None


def crs_units(crs: str | None) -> tuple[Guess | None, Guess | None, str]:
    """Units of lengths and of levels from the CRS's axes, and what the CRS said when it gave none.

    The vertical axis of a compound CRS gives the levels' unit; otherwise both come from the
    horizontal axes (levels are nearly always surveyed in the unit of the map grid, common
    practice, no source).

    >>> crs_units("EPSG:2249")[0]
    Guess(value='ft', reason='CRS unit is US survey foot (taken as ft: the two feet differ by 2 parts per million)')
    """
    if crs is None:
        return None, None, "the layer has no CRS"
    parsed = pyproj.CRS.from_user_input(crs)
    if not parsed.is_projected:
        return None, None, f"the CRS ({parsed.name}) is not projected and says nothing of lengths"
    axes = parsed.axis_info
    flat = next((axis for axis in axes if axis.direction in ("east", "north")), axes[0])
    up = next((axis for axis in axes if axis.direction == "up"), None)
    length = _crs_unit(flat.unit_name, flat.unit_conversion_factor, what="CRS")
    level = length if up is None else _crs_unit(up.unit_name, up.unit_conversion_factor, what="vertical CRS")
    said = "" if length else f"the CRS unit is {flat.unit_name}, which the config cannot take"
    return length, level, said


def size_unit(name: str, values: FieldValues, *, crs_length: str | None) -> Guess | None:
    """The unit of a size field from the median of its positive values.

    Sewers run from about 4 in (100 mm) to about 10 ft (3,000 mm) (common practice, no source),
    so a median of about 4 to 120 is inches and of about 100 to 3,000 millimetres; where both
    fit (100 to 120) millimetres are taken, as inches would make the median pipe over 8 ft.
    Below 4 the sizes are metres or feet, and the CRS's unit says which.

    >>> size_unit("DIAMETER", FieldValues("DIAMETER", "number", 3, 0, 0, 0, {}, 10.0, 3, 1.0, 0.0), crs_length="ft")
    Guess(value='in', reason='median of DIAMETER is 10: inches (about 4 to 120)')
    """
    median = values.median
    if math.isnan(median):
        return None
    said = f"median of {name} is {median:g}"
    if median < 4:
        feet = crs_length == "ft"
        return Guess("ft" if feet else "m", f"{said}: below 4, so metres or feet; {'feet, as the CRS is in feet' if feet else 'metres, as the CRS is not in feet'}")
    if median < 100:
        return Guess("in", f"{said}: inches (about 4 to 120)")
    if median <= 120:
        return Guess("mm", f"{said}: inches (4 to 120) and millimetres (100 to 3,000) both fit; millimetres, as inches would make the median pipe over 8 ft")
    if median <= 3000:
        return Guess("mm", f"{said}: millimetres (about 100 to 3,000)")
    return Guess("mm", f"{said}: above 3,000, no rule fits; the default applies")


FLOW_UNITS: Mapping[str, tuple[str, ...]] = {"metric": ("m3/s", "l/s"), "US customary": ("cfs", "gpm")}
"""Flow units tried by their values, largest first; MGD (1.55 cfs) cannot be told from cfs by values."""


def flow_unit(name: str, flow: np.ndarray, diameter_m: np.ndarray, *, system: str) -> Guess:
    r"""The unit of a flow field: the largest unit of ``system`` whose flows fit the pipes.

    .. math:: v = \frac{Q \, f_{unit}}{\pi D^2 / 4}

    is the mean velocity the flow would have filling the pipe; a design flow keeps its median
    below ``MAX_DESIGN_VELOCITY_M_S``.

    Parameters
    ----------
    name : the flow field, for the reason
    flow : flows per pipe [the field's unit]
    diameter_m : diameters per pipe [m], NaN where unknown
    system : ``metric`` or ``US customary``
    """
    units = FLOW_UNITS[system]
    usable = np.isfinite(flow) & (flow > 0) & np.isfinite(diameter_m) & (diameter_m > 0) & ~np.isin(flow, SENTINEL_LIKE)
    if not usable.any():
        return Guess(units[-1], f"no pipe has both {name} and a size to compare; the usual {system} unit")
    velocity = {unit: float(np.median(flow[usable] * FLOW_FACTORS[unit] / (np.pi * diameter_m[usable] ** 2 / 4))) for unit in units}
    chosen = next((unit for unit in units if velocity[unit] <= MAX_DESIGN_VELOCITY_M_S), units[-1])
    shown = ", ".join(f"{velocity[unit]:.3g} m/s as {unit}" for unit in units)
    note = "; MGD, 1.55 cfs, cannot be told from cfs by values" if chosen == "cfs" else ""
    return Guess(chosen, f"median of {name} over the full-bore area is {shown}: {chosen} keeps it below {MAX_DESIGN_VELOCITY_M_S:g} m/s{note}")


@dataclass(frozen=True)
class LayerGuess:
    """All guesses of one layer: fields, units (where decided), code tables, sentinels, notes."""

    role: str
    fields: dict[str, Guess]
    units: dict[str, Guess] = field(default_factory=dict)
    codes: dict[str, CodeField] = field(default_factory=dict)
    sentinels: dict[str, tuple[tuple[float, ...], str]] = field(default_factory=dict)


def _unit_keys(role: str) -> Mapping[str, tuple[str, str]]:
    return {"pipes": PIPE_UNITS, "manholes": MANHOLE_UNITS}.get(role, {})


def _size(units: Mapping[str, Guess]) -> Guess | None:
    """The unit guessed for the pipe sizes, if any."""
    return units.get("diameter", units.get("height", units.get("width")))


def _without_crs(default: str, said: str, size: Guess | None) -> Guess:
    """A length unit where the CRS gives none: feet with sizes in inches or feet, metres with metric sizes, else the default."""
    if size is None:
        return Guess(default, f"{said}; the default applies")
    unit = "ft" if size.value in ("in", "ft") else "m"
    return Guess(unit, f"{said}; the pipe sizes are in {size.value}, so {unit} is taken")


def guess_units(role: str, fields: Mapping[str, Guess], values: LayerValues, *, crs: str | None,
                pipe_units: Mapping[str, Guess] | None = None) -> dict[str, Guess]:  # fmt: skip
    """Units of the mapped fields of one layer (see the module docstring).

    A unit in the field name first (the size rule is still shown where it disagrees); then
    sizes by their median; levels and lengths by the CRS, else by the pipe sizes' system; the
    pipes' flow by the pipe areas; the manholes' loads as the pipes' flow. ``pipe_units`` are
    the pipes' guesses, for the manholes.
    """
    length, level, said = crs_units(crs)
    spec = _unit_keys(role)
    mapped = {key: fields[key].value for key in spec if key in fields}
    units: dict[str, Guess] = {}
    for key, name in mapped.items():
        named = guess_unit(name, quantity=spec[key][0])
        sized = size_unit(name, values.fields[name], crs_length=length.value if length else None) if key in SIZES and name in values.fields else None
        if named is not None:
            disagree = f"; but the values say otherwise: {sized.reason}" if sized and sized.value != named else ""
            units[key] = Guess(named, f"unit in the field name {name}{disagree}")
        elif sized is not None:
            units[key] = sized
    size = _size(units if role == "pipes" else pipe_units or {})
    flow = (pipe_units or {}).get("flow")
    for key in mapped.keys() - units.keys():
        quantity, default = spec[key]
        if quantity == "length":
            units[key] = (level if key in LEVELS else length) or _without_crs(default, said, size)
        elif role == "pipes":
            us = (length is not None and length.value == "ft") or (size is not None and size.value in ("in", "ft"))
            units[key] = _pipe_flow_unit(fields, units, values, system="US customary" if us else "metric")
        elif flow is not None:
            units[key] = Guess(flow.value, f"the unit guessed for the pipes' flow ({flow.reason})")
    return {key: units[key] for key in spec if key in units}


def _pipe_flow_unit(fields: Mapping[str, Guess], units: Mapping[str, Guess], values: LayerValues, *, system: str) -> Guess:
    size = units.get("diameter")
    name = fields["flow"].value
    diameter = np.full(values.count, np.nan)
    if size is not None and fields["diameter"].value in values.fields:
        diameter = numbers(values.column(fields["diameter"].value)) * LENGTH_FACTORS[size.value]
    return flow_unit(name, numbers(values.column(name)), diameter, system=system)


def guess_sentinels(fields: Mapping[str, Guess], values: LayerValues) -> dict[str, tuple[tuple[float, ...], str]]:
    """Values to declare as "unknown" per mapped numeric key: ``[<layer>.sentinels]``.

    0 where zeros are frequent in a key that cannot be 0 (a size, a depth, a year), or in a
    level where far fewer values lie within 1 of 0 than are exactly 0 (a surveyed level is
    seldom exactly 0); any sentinel-like number that ``[input] sentinels`` does not already hold.
    """
    found: dict[str, tuple[tuple[float, ...], str]] = {}
    for key, guess in fields.items():
        counted = values.fields.get(guess.value)
        if counted is None or not counted.numeric or key in NOT_NUMBERS:
            continue
        reasons, listed = [], []
        frequent = counted.zeros >= max(1, ZERO_SHARE * counted.filled)
        if frequent and key in NOT_ZERO:
            listed.append(0.0)
            reasons.append(f"{counted.zeros} of {counted.filled} values are 0, which cannot be a real {key.replace('_', ' ')}")
        elif frequent and key in LEVELS and counted.near_zero < counted.zeros:
            listed.append(0.0)
            reasons.append(f"{counted.zeros} of {counted.filled} values are exactly 0 but only {counted.near_zero} lie within 1 of it")
        for value, used in counted.sentinels.items():
            if value not in InputOptions().sentinels:
                listed.append(value)
                reasons.append(f"{used} values are {value:g}")
        if listed:
            found[key] = (tuple(listed), "; ".join(reasons))
    return found


def node_candidates(names: Sequence[str], values: LayerValues | None = None) -> tuple[list[str], list[str], list[str]]:
    """Pipe fields that may hold the upstream node, the downstream node, or a node of either end.

    A field names a node when its name says an end and a node (``US_MH``, ``FromNode``) or only
    an end (``UPSTREAM``), and holds text or numbers; the match rate decides among them.

    >>> node_candidates(["US_MH", "DS_MH", "US_IL", "NODE_B", "PIPE_ID"])
    (['US_MH'], ['DS_MH'], ['NODE_B'])
    """
    usable = [name for name in names if _fits("any", _values(values, name)) and not words_of(name) & (LEVEL | DEPTH)]
    only_end = [name for name in usable if words_of(name) <= UP | DOWN]
    named = [name for name in usable if words_of(name) & NODE]
    ends = {side: [name for name in [*named, *only_end] if side_of(name) == side] for side in ("up", "down")}
    return ends["up"], ends["down"], [name for name in usable if NODE_ENDS.names(name) and side_of(name) is None]


def guess_layer(role: str, names: Sequence[str], values: LayerValues, *, crs: str | None, fixed: Mapping[str, Guess],
                pipe_units: Mapping[str, Guess] | None = None) -> LayerGuess:  # fmt: skip
    """Every guess for one layer: its kind and shape fields by their codes, the other fields by
    name and values, the units and the sentinels.

    Parameters
    ----------
    role : ``pipes``, ``manholes`` or ``catchments``
    names : the layer's fields, in order
    values : the columns read from it
    crs : the layer's CRS as listed (None: none)
    fixed : keys decided already (node fields, the outlet field)
    pipe_units : the pipes' unit guesses, offered to the manholes (loads as the pipes' flow)
    """
    decided = dict(fixed)
    codes: dict[str, CodeField] = {}
    tables = {"pipes": ((KIND_RULE, PIPE_KIND_WORDS), (SHAPE_RULE, SHAPE_WORDS)), "manholes": ((KIND_RULE, NODE_KIND_WORDS),)}
    for rule, vocabulary in tables.get(role, ()):
        found = guess_code_field(names, values, rule=rule, vocabulary=vocabulary, taken={guess.value for guess in decided.values()})
        if found is not None:
            codes[found.key] = found
            decided[found.key] = Guess(found.field, found.reason)
    guessed = guess_fields(names, role=role, values=values, fixed=decided)
    fields = {key: guessed[key] for key in ORDER[role] if key in guessed}
    units = guess_units(role, fields, values, crs=crs, pipe_units=pipe_units)
    return LayerGuess(role, fields, units, codes, guess_sentinels(fields, values))


def wanted(role: str, names: Sequence[str]) -> list[str]:
    """The fields of a layer worth reading for ``role``: those some name rule offers, in layer order."""
    rules = [*RULES[role], *{"pipes": (KIND_RULE, SHAPE_RULE), "manholes": (KIND_RULE, *MANHOLE_IDS), "catchments": (OUTLETS,)}[role]]
    offered = set(candidates(names, rules))
    if role == "pipes":
        offered |= {name for group in node_candidates(names) for name in group}
    return [name for name in names if name in offered]
