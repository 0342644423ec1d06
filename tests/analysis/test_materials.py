"""Material table: values, sources and tags as listed in docs/sources.md section 3."""

import json

import pytest

from analysis.errors import InputError
from analysis.kinetics.materials import (
    VALUE_KEYS,
    get_material,
    list_materials,
    load_material_file,
)

# (material, key, value, tag). Values, sources and tags as in docs/sources.md tables 3.1/3.2.
TABLE = [
    ("PE", "tm0_c", 141.1, "confirmed"),        # Broadhurst, J. Res. NBS 1962-63
    ("PE", "dh0_j_per_g", 293.0, "from memory"),  # Wunderlich # from memory
    ("PE", "sigma_e_mj_m2", 90.0, "from memory"),  # Hoffman & Miller 1997, Polymer 38, 3151 # from memory
    ("iPP", "tm0_c", 185.0, "from memory"),     # Clark & Hoffman 1984 # from memory
    ("iPP", "dh0_j_per_g", 207.0, "from memory"),  # handbook # from memory
    ("iPP", "rho_c_g_cm3", 0.936, "from memory"),  # handbook value, docs/sources.md 3.1 # from memory
    ("iPP", "rho_a_g_cm3", 0.854, "from memory"),  # handbook value, docs/sources.md 3.1 # from memory
    ("PET", "dh0_j_per_g", 140.0, "confirmed"),  # Palys & Phillips 1980 as used in LH work
    ("PET", "b0_angstrom", 5.53, "confirmed"),   # Palys & Phillips 1980
    ("PEO", "dh0_j_per_g", 215.6, "confirmed"),  # Afifi-Effat & Hay 1972
    ("PEO", "tm0_c", 75.0, "confirmed"),         # Afifi-Effat & Hay 1972
    ("PHB", "dh0_j_per_g", 146.0, "confirmed"),  # Barham et al. 1984, J. Mater. Sci.
    ("PA6", "tm0_c", 260.0, "confirmed"),        # Illers 1978, Makromol. Chem.
    ("PBT", "dh0_j_per_g", 140.0, "confirmed"),  # Illers 1980, Colloid Polym. Sci.
    ("PEEK", "dh0_j_per_g", 122.5, "confirmed"),  # Mehmet-Alkan & Hay 1992, Polymer 33, 3527
    ("PEEK", "tm0_c", 389.0, "confirmed"),       # Lee & Porter 1987, Macromolecules 20, 1336
    ("PCL", "tm0_c", 69.0, "confirmed"),         # PCL crystallization studies I (docs/sources.md [C10])
    ("PVDF", "dh0_j_per_g", 104.7, "from memory"),  # Nakagawa & Ishida 1973 # from memory
]


@pytest.mark.parametrize("name, key, value, tag", TABLE)
def test_values_and_tags_match_references(name, key, value, tag):
    entry = get_material(name).values[key]
    assert entry.value == value and entry.tag == tag and entry.source


def test_every_value_has_source_and_known_tag():
    for material in list_materials():
        assert material.values
        for entry in material.values.values():
            assert entry.source.strip()
            assert entry.tag in ("confirmed", "from memory")


def test_derived_quantities():
    # Delta h_f = dH0 * rho_c; PE 293 * 1.000 -> 2.93e8 J/m3, iPP ratio 1.096 (docs/sources.md 3.1, 4.1)
    assert get_material("PE").delta_hf_j_per_m3 == pytest.approx(2.93e8)
    assert get_material("ipp").density_ratio == pytest.approx(1.0960, abs=1e-4)
    assert get_material("PE").b0_m == pytest.approx(4.15e-10)
    assert get_material("PCL").b0_m is None


def test_aliases_case_insensitive_and_unknown():
    assert get_material("pp").name == "iPP"
    assert get_material(" Polypropylene ").name == "iPP"
    assert get_material("nylon 6").name == "PA6"
    with pytest.raises(InputError, match="unknown material 'unobtainium'.*iPP"):
        get_material("unobtainium")


def test_user_files_extend_and_override(tmp_path, monkeypatch):
    monkeypatch.setenv("SPHEROKIN_MATERIALS_DIR", str(tmp_path / "none"))
    extra = tmp_path / "lab.json"
    extra.write_text(json.dumps({"schema": 1, "materials": [
        {"name": "Resin-Q7", "aliases": ["q7"],
         "values": {"tm0_c": {"value": 171.0, "source": "lab notebook", "tag": "user"}}}]}))
    assert get_material("Q7", extra_files=[extra]).tm0_c == 171.0
    user_dir = tmp_path / "user"
    user_dir.mkdir()
    (user_dir / "override.json").write_text(json.dumps({"materials": [
        {"name": "iPP", "values": {"tm0_c": {"value": 187.5, "source": "own HW plot"}}}]}))
    monkeypatch.setenv("SPHEROKIN_MATERIALS_DIR", str(user_dir))
    assert get_material("iPP").tm0_c == 187.5


@pytest.mark.parametrize("content, problem", [
    ("{not json", "not a valid JSON"),
    ('{"materials": 3}', "'materials' list"),
    ('{"materials": [{"values": {}}]}', "non-empty 'name'"),
    ('{"materials": [{"name": "X", "values": {"tm0": {"value": 1, "source": "s"}}}]}', "unknown value keys"),
    ('{"materials": [{"name": "X", "values": {"tm0_c": {"value": "hot", "source": "s"}}}]}', "not a number"),
    ('{"materials": [{"name": "X", "values": {"tm0_c": {"value": 1}}}]}', "'source'"),
])
def test_bad_material_files(tmp_path, content, problem):
    path = tmp_path / "bad.json"
    path.write_text(content)
    with pytest.raises(InputError, match=problem) as info:
        load_material_file(path)
    assert str(path) in str(info.value) and "\n" not in str(info.value)
    assert len(VALUE_KEYS) == 9
