"""Scenario files: TOML in, a validated :class:`Scenario` out (and back).

A scenario holds what an operator knows about one dosing job: the effluent
as measured, the batch volume or the flow, the pH window, the reagent, the
model switches and, optionally, prices, storage and permit caps. The format
is documented in the README. Parsing uses the standard library's
``tomllib``; every key is checked, and every problem is one
:class:`~dosing.errors.ScenarioError` naming the file, the key and what is
allowed.

Only :func:`load_scenario` reads a file; :func:`parse_scenario` is pure.
"""

from __future__ import annotations

import math
import tomllib
from pathlib import Path
from typing import Any, Mapping

from ..chem.activity import DEFAULT_CHOICE
from ..planning.effluent import infer_water
from ..planning.job import Scenario, scenario_key
from ..planning.measurements import (ACIDITY_ENDPOINT_PH, ALKALINITY_ENDPOINT_PH,
                                     BACKGROUND_IONS, DEFAULT_DEPTH_M, DEFAULT_PCO2_UATM,
                                     Measurements)
from ..errors import InputError, ScenarioError
from ..planning.basis import Batch, Flow, Target
from ..planning.reagents import Reagent, ph_reagent
from ..planning.strengths import as_slurry, custom_reagent, with_purity
from ..planning.hazards import ION_PERMIT_KEYS
from ..chem.metals import METAL_IDS
from ..planning.solids import CAKE_DENSITY_KG_L, CAKE_SOLIDS_FRACTION, METAL_PERMIT_KEYS
from ..chem.species import SYSTEM_IDS
from ..planning.uncertainty import SPREAD_KEYS, spread_from
from ..planning.blend import mix_streams
from ..planning.discharge import METAL_BASES
from ..planning.train import water_of
from .disturbance_scenario import read_disturbances
from .train_scenario import basis_of_blend, read_steps

__all__ = ["Scenario", "PERMIT_KEYS", "parse_scenario", "load_scenario",
           "scenario_to_toml", "build_scenario", "scenario_key", "measurements_of"]

#: Keys of the optional [permit] table: caps on the discharge [mg/L]
#: (ions and dissolved solids, then dissolved metals as the element).
PERMIT_KEYS = ION_PERMIT_KEYS + METAL_PERMIT_KEYS

_SCHEMA: dict[str, dict[str, tuple]] = {
    # section: key -> (types, required)
    "effluent": {
        "ph": ((int, float), True),
        "temperature_c": ((int, float), False),
        "alkalinity_mg_l_as_caco3": ((int, float), False),
        "acidity_mg_l_as_caco3": ((int, float), False),
        "alkalinity_endpoint_ph": ((int, float), False),
        "acidity_endpoint_ph": ((int, float), False),
        "solutes_mmol_l": ((dict,), False),
        "solutes_mg_l": ((dict,), False),
        "extra_ionic_strength_mol_l": ((int, float), False),
        "ions_mg_l": ((dict,), False),
        "unknown_pka": ((int, float), False),
        "metals_mg_l": ((dict,), False),
        "oxidise_ferrous": ((bool,), False),
    },
    "batch": {"volume_m3": ((int, float), True)},
    "flow": {"m3_per_h": ((int, float), True),
             "hours_per_day": ((int, float), False),
             "m3_per_h_min": ((int, float), False), "m3_per_h_max": ((int, float), False)},
    "target": {"ph_min": ((int, float), True), "ph_max": ((int, float), True),
               "ph_aim": ((int, float), False)},
    "reagent": {
        "id": ((str,), False),
        "compound": ((str,), False),
        "mass_fraction": ((int, float), False),
        "density_kg_l": ((int, float), False),
        "molarity_mol_l": ((int, float), False),
        "form": ((str,), False),
        "name": ((str,), False),
        "purity": ((int, float), False),
        "price_per_kg": ((int, float), False),
        "storage_m3": ((int, float), False),
        "storage_kg": ((int, float), False),
        "readjust_id": ((str,), False),
        "slurry_fraction": ((int, float), False),
    },
    "model": {"activity": ((str,), False), "open_to_air": ((bool,), False),
              "pco2_uatm": ((int, float), False), "hours_in_air": ((int, float), False),
              "depth_m": ((int, float), False), "calcite": ((str,), False)},
    "permit": {k: ((int, float), False) for k in PERMIT_KEYS} | {"metals_basis": ((str,), False)},
    "sludge": {"cake_solids_fraction": ((int, float), False),
               "cake_density_kg_l": ((int, float), False)},
    "uncertainty": {k: ((int, float), False) for k in SPREAD_KEYS},
}
#: Plant figures with their largest believable value (common practice: far
#: above any real plant, low enough that no total or cost overflows).
_REAGENT_EXTRAS = (("price_per_kg", 1e6, "per kg"), ("storage_m3", 1e6, "m3"),
                   ("storage_kg", 1e9, "kg"))
_TOP = {"title": (str,), "site": (str,), "tank": (str,), "currency": (str,)}
#: The longest currency name or symbol taken ("EUR", "GBP", "US$", "€").
CURRENCY_CHARS = 8
_SECTIONS_REQUIRED = ("effluent", "target", "reagent")


def _is_number(v) -> bool:
    return isinstance(v, (int, float)) and not isinstance(v, bool)


def _finite(v) -> bool:
    """True for a number a float can hold and that is finite (TOML integers
    may be far larger than any float)."""
    try:
        return math.isfinite(float(v))
    except OverflowError:
        return False


def _check_types(path: str, data: Mapping[str, Any]) -> None:
    for key, value in data.items():
        if key in ("step", "disturbance"):
            continue                # checked by io.train_scenario, io.disturbance_scenario
        if key in _TOP:
            if not isinstance(value, _TOP[key]):
                raise ScenarioError(path, key, "expected text in quotes")
            if key == "currency" and not (0 < len(value.strip()) <= CURRENCY_CHARS
                                          and value.strip().isprintable()):
                raise ScenarioError(path, key, f"{value!r}; allowed: a currency code or "
                                    f"symbol of 1 to {CURRENCY_CHARS} characters, e.g. "
                                    "\"EUR\"")
            continue
        if key not in _SCHEMA:
            allowed = ", ".join(list(_TOP) + [f"[{s}]" for s in _SCHEMA])
            raise ScenarioError(path, key, f"unknown key; allowed at the top: {allowed}")
        if not isinstance(value, dict):
            raise ScenarioError(path, key, f"expected a table [{key}]")
        schema = _SCHEMA[key]
        for sub, v in value.items():
            where = f"{key}.{sub}"
            if sub not in schema:
                raise ScenarioError(path, where, "unknown key; allowed in "
                                    f"[{key}]: " + ", ".join(schema))
            types, _ = schema[sub]
            if (bool not in types and isinstance(v, bool)) or not isinstance(v, types):
                want = {(int, float): "a number", (str,): "text in quotes",
                        (bool,): "true or false", (dict,): "a table"}[types]
                raise ScenarioError(path, where, f"expected {want}, got {v!r}")
            if _is_number(v) and not _finite(v):
                raise ScenarioError(path, where, "expected a finite number of "
                                    "ordinary size, got " + _short(v))
        for sub, (_, required) in schema.items():
            if required and sub not in value:
                raise ScenarioError(path, f"{key}.{sub}", "missing; this key is required")
    _check_sections(path, data)
    for table, (kind, allowed) in _TABLES.items():
        for sid, v in data.get("effluent", {}).get(table, {}).items():
            where = f"effluent.{table}.{sid}"
            if sid not in allowed:
                raise ScenarioError(path, where, f"unknown {kind}; allowed: "
                                    + ", ".join(allowed))
            if not _is_number(v) or not _finite(v):
                raise ScenarioError(path, where, f"expected a finite number, got {_short(v)}")


def _check_sections(path: str, data: Mapping[str, Any]) -> None:
    """The sections a scenario needs: one dose, or a train ([[step]])."""
    if "step" in data:
        _check_train_sections(path, data)
        return
    for section in _SECTIONS_REQUIRED:
        if section not in data:
            raise ScenarioError(path, f"[{section}]", "missing; a scenario needs "
                                "[effluent], [target], [reagent] and one of "
                                "[batch] or [flow]")
    if ("batch" in data) == ("flow" in data):
        raise ScenarioError(path, "[batch]/[flow]", "give exactly one of [batch] "
                            "(a tank volume) or [flow] (a continuous stream)")


def _check_train_sections(path: str, data: Mapping[str, Any]) -> None:
    """A train: [target] always; [effluent] and [batch] or [flow] unless a blend
    makes the water; no [reagent] (each dose names its own)."""
    steps = data["step"]
    blend = isinstance(steps, list) and steps and isinstance(steps[0], dict) \
        and steps[0].get("kind") == "blend"
    if "target" not in data:
        raise ScenarioError(path, "[target]", "missing; a train needs the discharge window")
    if "reagent" in data:
        raise ScenarioError(path, "[reagent]", "a train names each dose's product in its "
                            "[[step]] (reagent = \"...\"); leave [reagent] out")
    if blend:
        for section in ("effluent", "batch", "flow"):
            if section in data:
                raise ScenarioError(path, f"[{section}]", "the blend step makes the water "
                                    "and its volume or flow from its streams; leave "
                                    f"[{section}] out")
        return
    if "effluent" not in data:
        raise ScenarioError(path, "[effluent]", "missing; give the water the train starts "
                            "from, or begin the train with a blend step")
    if ("batch" in data) == ("flow" in data):
        raise ScenarioError(path, "[batch]/[flow]", "give exactly one of [batch] "
                            "(a tank volume) or [flow] (a continuous stream)")


#: Tables of [effluent] keyed by name: what they hold and the names allowed.
_TABLES = {"solutes_mmol_l": ("solute", SYSTEM_IDS), "solutes_mg_l": ("solute", SYSTEM_IDS),
           "ions_mg_l": ("ion", tuple(BACKGROUND_IONS)), "metals_mg_l": ("metal", METAL_IDS)}


def _short(v) -> str:
    """A value as the user wrote it, cut to one readable line."""
    text = repr(v)
    return text if len(text) <= 40 else text[:20] + "..." + text[-8:]


def _reagent(r: Mapping[str, Any]) -> Reagent:
    if "id" in r:
        extra = set(r) & {"compound", "mass_fraction", "density_kg_l", "molarity_mol_l",
                          "form"}
        if extra:
            raise InputError(f"reagent.{sorted(extra)[0]}", "give either a catalogue "
                             "id or a custom reagent (compound and strength), not both")
        reagent = ph_reagent(r["id"])
        if "purity" in r:
            reagent = with_purity(reagent, r["purity"])
        if "slurry_fraction" in r:
            reagent = as_slurry(reagent, float(r["slurry_fraction"]))
        return reagent
    if "compound" not in r:
        raise InputError("reagent.id", "give a catalogue id, or a custom reagent "
                         "with compound and mass_fraction or molarity_mol_l")
    if "purity" in r:
        raise InputError("reagent.purity", "for a custom reagent give mass_fraction")
    return custom_reagent(r["compound"], mass_fraction=r.get("mass_fraction"),
                          density_kg_l=r.get("density_kg_l"),
                          molarity_mol_l=r.get("molarity_mol_l"),
                          form=r.get("form"), name=r.get("name"))


def measurements_of(data: Mapping[str, Any]) -> Measurements:
    """The measurements of a scenario (its [effluent] and [model] tables)."""
    eff, model = data["effluent"], data.get("model", {})
    return Measurements(
        ph=eff["ph"], temperature_c=eff.get("temperature_c", 25.0),
        alkalinity_mg_l_as_caco3=eff.get("alkalinity_mg_l_as_caco3"),
        acidity_mg_l_as_caco3=eff.get("acidity_mg_l_as_caco3"),
        solutes_mmol_l=eff.get("solutes_mmol_l"), solutes_mg_l=eff.get("solutes_mg_l"),
        activity=model.get("activity", DEFAULT_CHOICE),
        open_to_air=model.get("open_to_air", False),
        pco2_uatm=model.get("pco2_uatm", DEFAULT_PCO2_UATM),
        hours_in_air=model.get("hours_in_air", 0.0),
        depth_m=model.get("depth_m", DEFAULT_DEPTH_M),
        calcite=model.get("calcite", "auto"),
        alkalinity_endpoint_ph=eff.get("alkalinity_endpoint_ph", ALKALINITY_ENDPOINT_PH),
        acidity_endpoint_ph=eff.get("acidity_endpoint_ph", ACIDITY_ENDPOINT_PH),
        extra_ionic_strength_mol_l=eff.get("extra_ionic_strength_mol_l", 0.0),
        ions_mg_l=eff.get("ions_mg_l"), unknown_pka=eff.get("unknown_pka"),
        metals_mg_l=eff.get("metals_mg_l"),
        oxidise_ferrous=eff.get("oxidise_ferrous", False))


def build_scenario(data: Mapping[str, Any], path: str = "<scenario>") -> Scenario:
    """Validate plain scenario data (as parsed from TOML) into a Scenario.

    Raises
    ------
    ScenarioError
        Naming ``path``, the key and what is allowed.
    """
    _check_types(path, data)
    try:
        fields = _common(data)
        fields |= _train(data) if "step" in data else _one_dose(data)
    except InputError as err:
        raise ScenarioError(path, scenario_key(err.field), err.reason) from None
    return Scenario(title=data.get("title", Path(path).stem), site=data.get("site", ""),
                    tank=data.get("tank", ""), currency=data.get("currency", "").strip(),
                    data=data, source=path,
                    disturbances=read_disturbances(path, data.get("disturbance")), **fields)


def _target(data: Mapping[str, Any]) -> Target:
    t = data["target"]
    return Target(float(t["ph_min"]), float(t["ph_max"]),
                  None if "ph_aim" not in t else float(t["ph_aim"]))


def _common(data: Mapping[str, Any]) -> dict[str, Any]:
    """What one dose and a train share: window, permit, sludge, spread, hours."""
    hours = data.get("flow", {}).get("hours_per_day", 24.0)
    if not 0 < hours <= 24:
        raise InputError("flow.hours_per_day", f"{hours:g}; allowed: above 0 "
                         "and up to 24")
    permit = dict(data.get("permit", {}))
    basis_key = permit.pop("metals_basis", "total")
    if basis_key not in METAL_BASES:
        raise InputError("permit.metals_basis", f"{basis_key!r}; allowed: "
                         + " or ".join(f'"{b}"' for b in METAL_BASES))
    for key, cap in permit.items():
        if not 0 < cap <= 1e6:
            raise InputError(f"permit.{key}", f"{cap:g}; allowed: above 0 and up "
                             "to 1,000,000 mg/L")
    return dict(target=_target(data), hours_per_day=float(hours), permit=permit,
                metals_basis=basis_key, sludge=_sludge(data.get("sludge", {})),
                spread=spread_from(data.get("uncertainty")),
                flow_range_m3_h=_flow_range(data.get("flow")))


def _one_dose(data: Mapping[str, Any]) -> dict[str, Any]:
    """The fields of a one-dose scenario: its water, amount and product."""
    r = data["reagent"]
    measurements = measurements_of(data)
    reagent = _reagent(r)
    for key, top, unit in _REAGENT_EXTRAS:
        if key in r and not 0 < r[key] <= top:
            raise InputError(f"reagent.{key}", f"{r[key]:g}; allowed: above 0 "
                             f"and up to {top:,.0f} {unit}")
    if "storage_m3" in r and reagent.form != "liquid":
        raise InputError("reagent.storage_m3", "storage by volume is for a "
                         "solution; give storage_kg for a solid or a gas")
    if "storage_m3" in r and "storage_kg" in r:
        raise InputError("reagent.storage_kg", "give storage_m3 or storage_kg, not both")
    readjust = None
    if "readjust_id" in r:
        try:
            readjust = ph_reagent(r["readjust_id"])
        except InputError as err:
            raise InputError("reagent.readjust_id", err.reason) from None
    return dict(measurements=measurements, water=infer_water(measurements),
                basis=_basis(data), reagent=reagent, price_per_kg=r.get("price_per_kg"),
                storage_m3=r.get("storage_m3"), storage_kg=r.get("storage_kg"),
                readjust=readjust)


def _basis(data: Mapping[str, Any]) -> Batch | Flow:
    return (Batch(float(data["batch"]["volume_m3"])) if "batch" in data
            else Flow(float(data["flow"]["m3_per_h"])))


def _train(data: Mapping[str, Any]) -> dict[str, Any]:
    """The fields of a train: its steps, the water it starts from, its amount."""
    steps = read_steps(data["step"], _target(data), measurements_of, data.get("model", {}))
    if steps[0].kind == "blend":
        mix, template, ions = mix_streams(steps[0].streams)
        water, measurements, basis = water_of(mix, template, ions_mg_l=ions), None, \
            basis_of_blend(steps[0])
    else:
        measurements = measurements_of(data)
        water, basis = infer_water(measurements), _basis(data)
    first = next((s for s in steps if s.kind == "dose"), None)
    if first is None:
        raise InputError("step", "a train needs at least one dose step")
    return dict(measurements=measurements, water=water, basis=basis, reagent=first.reagent,
                price_per_kg=first.price_per_kg, storage_m3=None, storage_kg=None,
                train=steps)


def _flow_range(flow: Mapping[str, Any] | None) -> tuple[float, float] | None:
    """The lowest and highest flow of a stream, when given (both, around the flow)."""
    if not flow or ("m3_per_h_min" not in flow and "m3_per_h_max" not in flow):
        return None
    q = float(flow["m3_per_h"])
    lo = float(flow.get("m3_per_h_min", q))
    hi = float(flow.get("m3_per_h_max", q))
    if not 0 < lo <= q:
        raise InputError("flow.m3_per_h_min", f"{lo:g}; allowed: above 0 and up to "
                         f"the flow, {q:g} m3/h")
    if not q <= hi <= 1e5:
        raise InputError("flow.m3_per_h_max", f"{hi:g}; allowed: from the flow, {q:g} "
                         "m3/h, up to 100,000 m3/h")
    return lo, hi


def _sludge(table: Mapping[str, Any]) -> tuple[float, float]:
    """Cake solids fraction [-] and density [kg/L] from the [sludge] table."""
    frac = table.get("cake_solids_fraction", CAKE_SOLIDS_FRACTION)
    dens = table.get("cake_density_kg_l", CAKE_DENSITY_KG_L)
    if not 0.01 <= frac <= 0.9:
        raise InputError("sludge.cake_solids_fraction", f"{frac:g}; allowed: 0.01 to 0.9")
    if not 0.9 <= dens <= 2.5:
        raise InputError("sludge.cake_density_kg_l", f"{dens:g}; allowed: 0.9 to 2.5 kg/L")
    return float(frac), float(dens)


def parse_toml(text: str, path: str, what: str = "a scenario") -> dict[str, Any]:
    """TOML text as plain data; one clear error for what is not TOML."""
    # A byte-order mark from a Windows editor is not part of the TOML.
    text = text.removeprefix("\ufeff")
    try:
        return tomllib.loads(text)
    except tomllib.TOMLDecodeError as err:
        raise ScenarioError(path, "", f"not valid TOML ({err})") from None
    except RecursionError:
        raise ScenarioError(path, "", f"nested too deeply to be {what} (tables "
                            "inside tables, hundreds of levels)") from None


def read_text_file(path: str | Path, what: str = "scenario file") -> str:
    """The UTF-8 text of a file the user named; one clear error otherwise."""
    p = Path(path)
    try:
        if p.exists() and not p.is_dir() and not p.is_file():
            raise ScenarioError(str(path), "", f"is not a regular file (a pipe or a "
                                f"device); give a {what}")
        return p.read_text(encoding="utf-8")
    except FileNotFoundError:
        raise ScenarioError(str(path), "", "no such file") from None
    except IsADirectoryError:
        raise ScenarioError(str(path), "", f"is a folder, not a {what}") from None
    except UnicodeDecodeError:
        raise ScenarioError(str(path), "", "not a UTF-8 text file") from None
    except OSError as err:
        raise ScenarioError(str(path), "", f"cannot be read ({err.strerror})") from None


def parse_scenario(text: str, path: str = "<scenario>") -> Scenario:
    """Parse TOML text into a :class:`Scenario`."""
    return build_scenario(parse_toml(text, path), path)


def load_scenario(path: str | Path) -> Scenario:
    """Read and validate a scenario file."""
    return parse_scenario(read_text_file(path), str(path))


def scenario_to_toml(data: Mapping[str, Any], original: str | None = None) -> str:
    """Write plain scenario data as TOML that :func:`parse_scenario` reads.

    With ``original`` (the text of the file the data came from) its comments,
    order and layout are kept and only the values that changed are written
    (tomlkit); keys no longer in ``data`` are removed, new ones added.
    """
    import tomlkit
    doc = tomlkit.parse(original.lstrip("\ufeff")) if original else tomlkit.document()
    for key in _TOP:
        _set(doc, key, data.get(key))
    for name in ("step", "disturbance"):
        _set_tables(doc, name, data.get(name))
    for section in _SCHEMA:
        values = data.get(section)
        if values is None:
            if section in doc:
                del doc[section]
            continue
        if section not in doc or not isinstance(doc[section], dict):
            doc[section] = tomlkit.table()
        table = doc[section]
        for key in [k for k in table if k not in values]:
            del table[key]
        for key, value in values.items():
            _set(table, key, value)
    return tomlkit.dumps(doc)


def _set_tables(doc, name: str, tables) -> None:
    """A [[step]] or [[disturbance]] list: kept as written when unchanged, else anew."""
    if tables is None:
        if name in doc:
            del doc[name]
        return
    if name in doc and _plain(doc[name]) == tables:
        return
    doc[name] = _aot(tables)


def _aot(tables):
    """Tables as a TOML array of tables (a blend's [[step.stream]] nested)."""
    import tomlkit
    aot = tomlkit.aot()
    for values in tables:
        table = tomlkit.table()
        for key, value in values.items():
            is_aot = isinstance(value, list) and value and all(isinstance(v, dict)
                                                               for v in value)
            table[key] = _aot(value) if is_aot else value
        aot.append(table)
    return aot


def _set(container, key: str, value) -> None:
    """Set ``key`` unless it already holds that value (so its comment stays)."""
    import tomlkit
    if value is None:
        if key in container:
            del container[key]
        return
    if key in container and _plain(container[key]) == value:
        return
    if isinstance(value, dict):
        item = tomlkit.inline_table()
        item.update(value)
        container[key] = item
    else:
        container[key] = value


def _plain(item):
    """A tomlkit item as plain Python data."""
    return item.unwrap() if hasattr(item, "unwrap") else item
