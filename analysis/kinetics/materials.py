"""Reference constants of semicrystalline polymers, each value with its source and tag.

Public API
----------
``Material`` (frozen): ``name``, ``full_name``, ``aliases``, ``values`` (dict key ->
``SourcedValue(value, source, tag, note)``); convenience properties in SI or stated units:
``tm0_c``, ``tg_c``, ``dh0_j_per_g``, ``rho_c_g_cm3``, ``rho_a_g_cm3``, ``density_ratio``,
``delta_hf_j_per_m3`` (= dH0 * rho_c * 1e6), ``a0_m``, ``b0_m``, ``sigma_j_m2``,
``sigma_e_j_m2`` (``None`` where unknown).
``get_material(name, *, extra_files=()) -> Material`` case-insensitive, aliases allowed;
unknown names raise InputError listing the known ones.
``list_materials(*, extra_files=()) -> list[Material]``
``load_material_file(path) -> list[Material]`` (InputError on a bad file).
``user_material_dir() -> pathlib.Path``: ``$SPHEROKIN_MATERIALS_DIR`` or
``~/.spherokin/materials``; every ``*.json`` there is loaded after the built-in table, and
a user entry with the same name replaces the built-in one.

File format (``analysis/data/materials.json`` and user files)::

    {"schema": 1, "materials": [{"name": "...", "full_name": "...", "aliases": [...],
      "values": {"tm0_c": {"value": 185.0, "source": "...", "tag": "from memory"}, ...}}]}

Tags follow docs/sources.md: "confirmed" or "from memory" (user files may also use "user").
"""

from __future__ import annotations

import json
import os
from dataclasses import dataclass
from pathlib import Path

from analysis.errors import InputError
from analysis.textio import read_text

__all__ = ["Material", "SourcedValue", "VALUE_KEYS", "get_material", "list_materials",
           "load_material_file", "user_material_dir"]

BUILTIN_FILE = Path(__file__).with_name("data") / "materials.json"
TAGS = ("confirmed", "from memory", "user")
VALUE_KEYS = ("tm0_c", "tg_c", "dh0_j_per_g", "rho_c_g_cm3", "rho_a_g_cm3", "a0_angstrom",
              "b0_angstrom", "sigma_mj_m2", "sigma_e_mj_m2")


@dataclass(frozen=True)
class SourcedValue:
    value: float
    source: str
    tag: str
    note: str = ""


@dataclass(frozen=True)
class Material:
    name: str
    full_name: str
    aliases: tuple[str, ...]
    values: dict

    def get(self, key: str) -> float | None:
        entry = self.values.get(key)
        return None if entry is None else entry.value

    def _scaled(self, key: str, factor: float) -> float | None:
        value = self.get(key)
        return None if value is None else value * factor

    tm0_c = property(lambda self: self.get("tm0_c"))
    tg_c = property(lambda self: self.get("tg_c"))
    dh0_j_per_g = property(lambda self: self.get("dh0_j_per_g"))
    rho_c_g_cm3 = property(lambda self: self.get("rho_c_g_cm3"))
    rho_a_g_cm3 = property(lambda self: self.get("rho_a_g_cm3"))
    a0_m = property(lambda self: self._scaled("a0_angstrom", 1e-10))
    b0_m = property(lambda self: self._scaled("b0_angstrom", 1e-10))
    sigma_j_m2 = property(lambda self: self._scaled("sigma_mj_m2", 1e-3))
    sigma_e_j_m2 = property(lambda self: self._scaled("sigma_e_mj_m2", 1e-3))

    @property
    def density_ratio(self) -> float | None:
        """rho_c / rho_a, or None if either density is unknown."""
        if self.rho_c_g_cm3 is None or self.rho_a_g_cm3 is None:
            return None
        return self.rho_c_g_cm3 / self.rho_a_g_cm3

    @property
    def delta_hf_j_per_m3(self) -> float | None:
        """Heat of fusion per unit crystal volume, dH0 [J/g] * rho_c [g/cm3] * 1e6."""
        if self.dh0_j_per_g is None or self.rho_c_g_cm3 is None:
            return None
        return self.dh0_j_per_g * self.rho_c_g_cm3 * 1e6

    def names(self) -> tuple[str, ...]:
        return (self.name, *self.aliases)


def _parse_value(key: str, raw, path) -> SourcedValue:
    if not isinstance(raw, dict) or "value" not in raw or "source" not in raw:
        raise InputError(f"value {key!r} needs 'value' and 'source'", path)
    value, tag = raw["value"], raw.get("tag", "user")
    if isinstance(value, bool) or not isinstance(value, (int, float)):
        raise InputError(f"value {key!r} is not a number: {value!r}", path)
    if tag not in TAGS:
        raise InputError(f"value {key!r} has tag {tag!r}; use one of {', '.join(TAGS)}", path)
    return SourcedValue(float(value), str(raw["source"]), tag, str(raw.get("note", "")))


def _parse_material(raw, path) -> Material:
    if not isinstance(raw, dict) or not isinstance(raw.get("name"), str) or not raw["name"]:
        raise InputError("every material needs a non-empty 'name'", path)
    values = raw.get("values", {})
    aliases = raw.get("aliases", [])
    if not isinstance(values, dict) or not isinstance(aliases, list):
        raise InputError(f"material {raw['name']!r}: 'values' must be an object and "
                         "'aliases' a list", path)
    unknown = sorted(set(values) - set(VALUE_KEYS))
    if unknown:
        raise InputError(f"material {raw['name']!r}: unknown value keys {unknown}; "
                         f"known: {', '.join(VALUE_KEYS)}", path)
    parsed = {key: _parse_value(key, v, path) for key, v in values.items()}
    return Material(raw["name"], str(raw.get("full_name", raw["name"])),
                    tuple(str(a) for a in aliases), parsed)


def load_material_file(path) -> list[Material]:
    """Read one materials JSON file (built-in format); InputError if it is malformed."""
    text = read_text(path, "materials file").lstrip("\ufeff")
    try:
        doc = json.loads(text)
    except (ValueError, RecursionError) as err:
        raise InputError(f"not a valid JSON materials file ({str(err)[:80]})", path) from None
    if not isinstance(doc, dict) or not isinstance(doc.get("materials"), list):
        raise InputError("materials file needs a top-level 'materials' list", path)
    if doc.get("schema", 1) != 1:
        raise InputError(f"materials schema {doc.get('schema')!r} is not supported (1)", path)
    return [_parse_material(raw, path) for raw in doc["materials"]]


def user_material_dir() -> Path:
    """Directory scanned for user material files (``$SPHEROKIN_MATERIALS_DIR`` wins)."""
    env = os.environ.get("SPHEROKIN_MATERIALS_DIR")
    return Path(env) if env else Path.home() / ".spherokin" / "materials"


def list_materials(*, extra_files=()) -> list[Material]:
    """Built-in materials, then user-directory files, then ``extra_files`` (later wins)."""
    user_dir = user_material_dir()
    user_files = sorted(user_dir.glob("*.json")) if user_dir.is_dir() else []
    by_name: dict[str, Material] = {}
    for path in (BUILTIN_FILE, *user_files, *extra_files):
        for material in load_material_file(path):
            by_name[material.name.casefold()] = material
    return list(by_name.values())


def get_material(name: str, *, extra_files=(), path=None) -> Material:
    """Look a material up by name or alias, ignoring case; InputError if unknown.

    ``path``: the file that asked for the material (named in the error).
    """
    wanted = str(name).strip().casefold()
    materials = list_materials(extra_files=extra_files)
    for material in materials:
        if wanted in (n.casefold() for n in material.names()):
            return material
    known = ", ".join(m.name for m in materials)
    raise InputError(f"unknown material {str(name)[:40]!r}; known materials: {known}", path)
