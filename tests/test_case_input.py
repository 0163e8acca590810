"""Reading case files: every kind of bad input, SI conversion, compact tables.

Unit conversions are checked against outside references: scipy.constants
(CODATA / NIST values) and pint's own unit definitions.
"""
from __future__ import annotations

import copy
import dataclasses
import json
import math
from pathlib import Path

import pytest
import scipy.constants as const
from hypothesis import given, settings
from hypothesis import strategies as st
from numpy.testing import assert_allclose

from cablefe.errors import CaseError
from cablefe.io.case import interior_nodes, match_members, parse_case, read_case
from cablefe.io import case as case_module
from cablefe.io.units import STANDARD_GRAVITY, Quantities, registry, unit_system
from cablefe.spec import (MemberLoad, NodalLoad, PatchLoad, PrescribedDisplacement, SelfWeight,
                          TemperatureLoad, UnitSystem)

# Float round-off of a handful of multiplications on values typed with at most
# 17 significant digits: far below this, far above any real conversion error.
RTOL_UNITS = 1e-12

CASES = Path(__file__).resolve().parent.parent / "cases"


BASE = """\
title = "test frame"

[materials.strand]
E = "160 GPa"
unit_weight = "78.5 kN/m^3"
alpha = 1.2e-5

[sections.main]
material = "strand"
area = "1960 mm^2"

[sections.hanger]
material = "strand"
area = "380 mm^2"

[nodes]
A = [0, 0, 10]
B = [40, 0, 10]
C = [20, 0, 0]

[supports]
A = "all"
B = "x y z"

[[members]]
id = "M1"
type = "cable"
nodes = ["A", "C"]
section = "main"

[[members]]
id = "M2"
type = "cable"
nodes = ["C", "B"]
section = "main"
divide = 4

[[loads]]
case = "dead"
self_weight = true
"""


def write(tmp_path, text, name="case.toml"):
    path = tmp_path / name
    path.write_text(text, encoding="utf-8")
    return path


def edit(text, old, new):
    assert old in text, old
    return text.replace(old, new, 1)


def expect_error(tmp_path, text, key, fragment):
    path = write(tmp_path, text)
    with pytest.raises(CaseError) as info:
        read_case(path)
    error = info.value
    assert error.key == key, f"key {error.key!r}, message: {error.message}"
    assert fragment in error.message, error.message
    assert error.file == str(path)
    return error


def test_base_case_reads(tmp_path):
    spec = read_case(write(tmp_path, BASE))
    assert [m.id for m in spec.members] == ["M1", "M2"]
    assert spec.load_cases == ("dead",)
    assert spec.source == str(tmp_path / "case.toml")
    assert spec.raw["members"][1]["divide"] == 4


# ---------------------------------------------------------------------------
# TOML syntax
# ---------------------------------------------------------------------------

def test_toml_syntax_error_gives_line_and_column(tmp_path):
    text = BASE + "\n[analysis]\nincrements = = 3\n"
    line = text.splitlines().index("increments = = 3") + 1
    expect_error(tmp_path, text, "", f"TOML syntax error at line {line}, column")


# The compiled parser reads the file when it is installed; tomli is the
# reference (it explains every syntax error).  Both must give the same data
# on every shipped case and on valid edge cases of the syntax (values from
# the TOML specification, toml.io, sections on strings, integers, floats,
# inline tables and arrays of tables), and the compiled one must never
# accept what tomli rejects.
TOML_EDGE_VALID = [
    'a = "tab\\there \\u00e9 \\U0001F600"\nb = \'C:\\\\raw\'\n',
    'a = """\nline one\\\n   joined"""\n',
    "a = 0xDEAD_BEEF\nb = 0o755\nc = 0b1101\nd = -17\ne = +99\nf = 1_000\n",
    "a = 6.626e-34\nb = -0.0\nc = inf\nd = -inf\ne = 224_617.445_991\n",
    "t = {x = 1, y = [1, 2.5, \"s\"], z = {w = true}}\n",
    "[[m]]\nid = 1\n[[m]]\nid = 2\n[m.sub]\nk = 3\n",
    'a.b.c = 1\na.d = 2\n"quoted key" = 3\n',
    "a = [\n  1,\n  2, # comment\n]\n",
    "a = 1979-05-27\nb = 07:32:00\nc = 1979-05-27T07:32:00\n",
]
TOML_EDGE_INVALID = [
    "a = 1\na = 2\n", "a = 012\n", "a = 1.\n", "a = 1__0\n", "a =\n", 'a = "\\q"\n',
    "a.b = 1\n[a]\nb = 2\n", "a = [1]\n[[a]]\nb = 1\n", 'a = "x\x01"\n', "a = [1, 2\n",
    "[t]\n[t]\n", "a = {b = 1\n", "a = 1 2\n",
]


@pytest.mark.skipif(case_module._fast_toml is None, reason="the compiled TOML parser is not installed")
def test_compiled_parser_agrees_with_tomli():
    import tomli
    for path in sorted(CASES.glob("*.toml")):
        text = path.read_text(encoding="utf-8")
        assert case_module._fast_parse(text) == tomli.loads(text), path.name
    for text in TOML_EDGE_VALID:
        assert case_module._fast_parse(text) == tomli.loads(text), text
    for text in TOML_EDGE_INVALID:
        with pytest.raises(tomli.TOMLDecodeError):
            tomli.loads(text)
        assert case_module._fast_parse(text) is None, text


def test_syntax_errors_come_from_tomli_when_the_compiled_parser_is_missing(tmp_path, monkeypatch):
    monkeypatch.setattr(case_module, "_fast_toml", None)
    spec = read_case(write(tmp_path, BASE))
    assert [m.id for m in spec.members] == ["M1", "M2"]
    text = BASE + "\n[analysis]\nincrements = = 3\n"
    expect_error(tmp_path, text, "", "TOML syntax error at line")


def test_duplicate_node_key_is_reported_as_duplicate(tmp_path):
    text = edit(BASE, "C = [20, 0, 0]\n", "C = [20, 0, 0]\nA = [5, 0, 0]\n")
    line = text.splitlines().index("A = [5, 0, 0]") + 1
    error = expect_error(tmp_path, text, "", "key A is defined twice")
    assert f"line {line}" in error.message


def test_duplicate_table_is_reported(tmp_path):
    expect_error(tmp_path, BASE + "\n[nodes]\nD = [1, 2, 3]\n", "", "[nodes] is already defined above")


def test_missing_file(tmp_path):
    with pytest.raises(CaseError) as info:
        read_case(tmp_path / "nope.toml")
    assert info.value.key == "" and "cannot read the case file" in info.value.message


# ---------------------------------------------------------------------------
# unknown keys
# ---------------------------------------------------------------------------

def test_unknown_top_level_key(tmp_path):
    expect_error(tmp_path, BASE + '\n[node]\nD = [1, 2, 3]\n', "node", 'did you mean "nodes"')


def test_unknown_member_key_lists_known(tmp_path):
    text = edit(BASE, 'section = "main"\ndivide', 'sectoin = "main"\nsection = "main"\ndivide')
    expect_error(tmp_path, text, "members[1].sectoin",
                 'unknown key "sectoin" (known: id, type, nodes, section, length0')


def test_unknown_key_in_inline_target_table(tmp_path):
    text = BASE + ('\n[shape]\npermanent = ["dead"]\n[shape.targets]\nC = { w = 1.0 }\n'
                   '[[shape.adjust]]\nmembers = "M*"\n')
    expect_error(tmp_path, text, "shape.targets.C.w", 'unknown key "w" (known: x, y, z)')


def test_unknown_units_key(tmp_path):
    expect_error(tmp_path, BASE + '\n[units]\nlenght = "mm"\n', "units.lenght",
                 'unknown key "lenght" (known: length, force)')


# ---------------------------------------------------------------------------
# references
# ---------------------------------------------------------------------------

def test_dangling_node(tmp_path):
    text = edit(BASE, 'nodes = ["A", "C"]', 'nodes = ["A", "X"]')
    expect_error(tmp_path, text, "members[0].nodes[1]", 'no node named "X"')


def test_dangling_section(tmp_path):
    text = edit(BASE, 'section = "main"\n', 'section = "mian"\n')
    expect_error(tmp_path, text, "members[0].section", 'no section named "mian" (known: main, hanger)')


def test_dangling_material(tmp_path):
    text = edit(BASE, 'material = "strand"\narea = "1960', 'material = "stran"\narea = "1960')
    expect_error(tmp_path, text, "sections.main.material", 'no material named "stran" (known: strand)')


def test_unknown_load_case_in_combination(tmp_path):
    text = BASE + '\n[[combinations]]\nname = "service"\nfactors = { dead = 1.0, crowd-left = 1.0 }\n'
    expect_error(tmp_path, text, "combinations[0].factors.crowd-left",
                 'no load defines the load case "crowd-left" (known: dead)')


def test_unknown_permanent_case_in_shape(tmp_path):
    text = BASE + ('\n[shape]\npermanent = ["dead", "deck"]\n[shape.targets]\nC = { z = 1.0 }\n'
                   '[[shape.adjust]]\nmembers = "M*"\n')
    expect_error(tmp_path, text, "shape.permanent[1]", 'no load defines the load case "deck"')


def test_support_on_unknown_node(tmp_path):
    text = edit(BASE, 'B = "x y z"', 'B = "x y z"\nZ = "all"')
    expect_error(tmp_path, text, "supports.Z", 'no node named "Z"')


def test_duplicate_member_id(tmp_path):
    text = BASE + '\n[[members]]\nid = "M1"\ntype = "bar"\nnodes = ["A", "B"]\nsection = "main"\n'
    expect_error(tmp_path, text, "members[2].id", 'duplicate member id "M1" (first at members[0])')


def test_duplicate_node_id_across_nodes_and_node_table(tmp_path):
    text = BASE + '\n[node_table]\nids = ["D", "B"]\nx = [1.0, 2.0]\ny = [0.0, 0.0]\nz = [0.0, 0.0]\n'
    expect_error(tmp_path, text, "node_table.ids[1]", 'duplicate node id "B" (first at nodes.B)')


def test_interior_node_id_colliding_with_declared_node(tmp_path):
    text = edit(BASE, "C = [20, 0, 0]\n", 'C = [20, 0, 0]\n"M2.3" = [1, 1, 1]\n')
    expect_error(tmp_path, text, 'nodes."M2.3"',
                 'duplicate node id "M2.3": it is also interior node 3 of divided member "M2"')


def test_member_between_the_same_node(tmp_path):
    text = edit(BASE, 'nodes = ["A", "C"]', 'nodes = ["C", "C"]')
    expect_error(tmp_path, text, "members[0].nodes", 'both ends are node "C"')


def test_member_between_coinciding_nodes(tmp_path):
    text = edit(BASE, "C = [20, 0, 0]\n", "C = [20, 0, 0]\nD = [20.0, 0.0, 0.0]\n")
    text += '\n[[members]]\nid = "S"\ntype = "bar"\nnodes = ["C", "D"]\nsection = "main"\n'
    expect_error(tmp_path, text, "members[2].nodes", 'zero length: nodes "C" and "D" coincide')


def test_member_may_not_end_on_its_own_interior_node(tmp_path):
    text = edit(BASE, 'nodes = ["C", "B"]', 'nodes = ["C", "M2.2"]')
    expect_error(tmp_path, text, "members[1].nodes[1]", '"M2.2" is an interior node of this member itself')


def test_divided_members_ending_on_each_other_in_a_loop(tmp_path):
    text = BASE + ('\n[[members]]\nid = "P"\ntype = "bar"\nnodes = ["A", "Q.1"]\nsection = "main"\ndivide = 2\n'
                   '\n[[members]]\nid = "Q"\ntype = "bar"\nnodes = ["P.1", "B"]\nsection = "main"\ndivide = 2\n')
    expect_error(tmp_path, text, "members[3].nodes", 'in a loop ("P" -> "Q" -> "P")')


def test_unknown_member_type(tmp_path):
    text = edit(BASE, 'type = "cable"', 'type = "cabel"')
    expect_error(tmp_path, text, "members[0].type", 'unknown member type "cabel" (known: cable, bar, beam)')


@pytest.mark.parametrize("code", ["x y w", "x x", "", "fixed"])
def test_unknown_support_code(tmp_path, code):
    text = edit(BASE, 'B = "x y z"', f'B = "{code}"')
    expect_error(tmp_path, text, "supports.B",
                 f'unknown support code "{code}" (valid: any space-separated set of x y z rx ry rz')


def test_tension_only_on_a_cable(tmp_path):
    text = edit(BASE, 'section = "main"\n\n[[members]]', 'section = "main"\ntension_only = true\n\n[[members]]')
    expect_error(tmp_path, text, "members[0].tension_only", "tension_only applies to bar members only")


def test_up_on_a_bar(tmp_path):
    text = BASE + '\n[[members]]\nid = "T"\ntype = "bar"\nnodes = ["A", "B"]\nsection = "main"\nup = [0, 0, 1]\n'
    expect_error(tmp_path, text, "members[2].up", "up applies to beam members only, this is a bar")


def test_beam_needs_second_moments_on_its_section(tmp_path):
    text = edit(BASE, '[nodes]', '[sections.deck]\nmaterial = "strand"\narea = 0.01\nIz = 1e-4\n\n[nodes]')
    text += '\n[[members]]\nid = "G"\ntype = "beam"\nnodes = ["A", "B"]\nsection = "deck"\n'
    expect_error(tmp_path, text, "members[2].section", 'section "deck" has no Iy, J: beam members need Iy, Iz and J')


def test_beam_up_parallel_to_axis(tmp_path):
    text = edit(BASE, '[nodes]', '[sections.deck]\nmaterial = "strand"\narea = 0.01\nIy = 1e-4\nIz = 1e-4\n'
                                 'J = 2e-4\n\n[nodes]')
    text += '\n[[members]]\nid = "G"\ntype = "beam"\nnodes = ["A", "B"]\nsection = "deck"\nup = [2, 0, 0]\n'
    expect_error(tmp_path, text, "members[2].up", "is parallel to the member axis")


def test_length0_and_pretension_together(tmp_path):
    text = edit(BASE, 'section = "main"\n\n[[members]]',
                'section = "main"\nlength0 = 23\npretension = 10\n\n[[members]]')
    expect_error(tmp_path, text, "members[0].pretension", "give either length0 or pretension, not both")


def test_cable_pretension_in_compression(tmp_path):
    text = edit(BASE, 'section = "main"\n\n[[members]]', 'section = "main"\npretension = -5\n\n[[members]]')
    expect_error(tmp_path, text, "members[0].pretension", "a cable cannot be pretensioned in compression")


@pytest.mark.parametrize("old, new, key, fragment", [
    ('section = "main"\n\n[[members]]', '\n[[members]]', "members[0].section", "missing: the section name"),
    ('nodes = ["A", "C"]', 'nodes = ["A", "C", "B"]', "members[0].nodes", "expected an array of two node ids, found 3"),
    ('unit_weight = "78.5 kN/m^3"', 'unit_weight = "78.5 kN/m^3"\ndensity = 8000', "materials.strand.density",
     "give either unit_weight or density, not both"),
    ("divide = 4", "divide = 4\ninterior = [[25, 0, 2]]", "members[1].interior", "expected 3 points [x, y, z]"),
    ('section = "main"\n\n[[members]]', 'section = "main"\ntitle = "x"\n\n[[members]]', "members[0].title",
     'unknown key "title"'),
])
def test_member_and_material_entries(tmp_path, old, new, key, fragment):
    expect_error(tmp_path, edit(BASE, old, new), key, fragment)


def test_length0_on_a_beam(tmp_path):
    text = edit(BASE, '[nodes]', '[sections.deck]\nmaterial = "strand"\narea = 0.01\nIy = 1e-4\nIz = 1e-4\n'
                                 'J = 2e-4\n\n[nodes]')
    text += '\n[[members]]\nid = "G"\ntype = "beam"\nnodes = ["A", "B"]\nsection = "deck"\nlength0 = 40\n'
    expect_error(tmp_path, text, "members[2].length0", "length0 applies to cable and bar members, this is a beam")


# ---------------------------------------------------------------------------
# numbers and units
# ---------------------------------------------------------------------------

@pytest.mark.parametrize("old, new, key", [
    ('area = "1960 mm^2"', "area = 0", "sections.main.area"),
    ('area = "380 mm^2"', 'area = "-380 mm^2"', "sections.hanger.area"),
    ('E = "160 GPa"', "E = -160e6", "materials.strand.E"),
    ('section = "main"\n\n[[members]]', 'section = "main"\nlength0 = 0.0\n\n[[members]]', "members[0].length0"),
    ('area = "380 mm^2"', 'area = "380 mm^2"\ndiameter = "-22 mm"', "sections.hanger.diameter"),
    ('area = "380 mm^2"', 'area = "380 mm^2"\nbreaking_load = 0', "sections.hanger.breaking_load"),
    ('area = "380 mm^2"', 'area = "380 mm^2"\nIy = "0 mm^4"', "sections.hanger.Iy"),
])
def test_non_positive_values(tmp_path, old, new, key):
    expect_error(tmp_path, edit(BASE, old, new), key, "expected a positive value")


def test_negative_weight(tmp_path):
    text = edit(BASE, 'area = "380 mm^2"', 'area = "380 mm^2"\nweight = -0.03')
    expect_error(tmp_path, text, "sections.hanger.weight", "expected a value >= 0, found -0.03")


@pytest.mark.parametrize("value, found", [("0", "the number 0"), ("2.5", "the number 2.5"),
                                          ("true", "the boolean true"), ('"4"', 'the string "4"')])
def test_divide_must_be_a_positive_integer(tmp_path, value, found):
    text = edit(BASE, "divide = 4", f"divide = {value}")
    expect_error(tmp_path, text, "members[1].divide", f"expected a positive integer, found {found}")


def test_wrong_dimension(tmp_path):
    text = edit(BASE, 'E = "160 GPa"', 'E = "160 m"')
    expect_error(tmp_path, text, "materials.strand.E", '"160 m" is a length, expected a stress or modulus')


def test_density_under_unit_weight_is_pointed_to_density(tmp_path):
    text = edit(BASE, 'unit_weight = "78.5 kN/m^3"', 'unit_weight = "8000 kg/m^3"')
    expect_error(tmp_path, text, "materials.strand.unit_weight", 'belongs under the key "density"')


def test_unknown_unit(tmp_path):
    text = edit(BASE, 'E = "160 GPa"', 'E = "160 GPaa"')
    expect_error(tmp_path, text, "materials.strand.E", 'cannot read "160 GPaa": unknown unit "GPaa"')


def test_offset_temperature_refused_for_a_change(tmp_path):
    text = BASE + '\n[[loads]]\ncase = "cold"\nmembers = "M*"\ntemperature = "-25 degC"\n'
    expect_error(tmp_path, text, "loads[1].temperature", 'delta_degC')


def test_units_table_of_wrong_dimension(tmp_path):
    expect_error(tmp_path, BASE + '\n[units]\nlength = "kN"\n', "units.length", '"kN" is a force, expected a length')


@pytest.mark.parametrize("old, new, key, fragment", [
    ('area = "1960 mm^2"', "area = true", "sections.main.area", "found the boolean true"),
    ('area = "1960 mm^2"', "area = [1960]", "sections.main.area", "found an array of 1 item"),
    ('area = "1960 mm^2"', 'area = "big"', "sections.main.area", 'cannot read "big"'),
    ('area = "1960 mm^2"', 'area = "1960"', "sections.main.area", '"1960" has no unit'),
    ("A = [0, 0, 10]", 'A = [0, "zero", 10]', "nodes.A[1]", 'cannot read "zero"'),
])
def test_non_numeric_values(tmp_path, old, new, key, fragment):
    expect_error(tmp_path, edit(BASE, old, new), key, fragment)


@pytest.mark.parametrize("old, new, key", [
    ('E = "160 GPa"', "E = nan", "materials.strand.E"),
    ('area = "1960 mm^2"', "area = inf", "sections.main.area"),
    ("A = [0, 0, 10]", "A = [0, 0, -inf]", "nodes.A[2]"),
    ('E = "160 GPa"', 'E = "inf GPa"', "materials.strand.E"),
])
def test_non_finite_values(tmp_path, old, new, key):
    expect_error(tmp_path, edit(BASE, old, new), key, "expected a finite number")


def test_non_finite_load_component(tmp_path):
    text = BASE + '\n[[loads]]\ncase = "p"\nnode = "C"\nforce = [0, 0, nan]\n'
    expect_error(tmp_path, text, "loads[1].force[2]", "expected a finite number, found nan")


@pytest.mark.parametrize("old, new, key", [
    ("A = [0, 0, 10]", "A = [0, 10]", "nodes.A"),
    ('self_weight = true', 'self_weight = true\n\n[[loads]]\ncase = "p"\nnode = "C"\nforce = [0, -10]',
     "loads[1].force"),
])
def test_vector_of_wrong_length(tmp_path, old, new, key):
    expect_error(tmp_path, edit(BASE, old, new), key, "expected an array of 3 numbers, found 2")


def test_dotted_node_id_must_be_quoted(tmp_path):
    text = edit(BASE, "C = [20, 0, 0]\n", "C = [20, 0, 0]\nD.1 = [1, 1, 1]\n")
    expect_error(tmp_path, text, "nodes.D", 'an id with a dot must be quoted: "D.1" = [x, y, z]')


# ---------------------------------------------------------------------------
# loads
# ---------------------------------------------------------------------------

@pytest.mark.parametrize("body", [
    'node = "C"\nper_length = [0, 0, -1]',
    'members = "M*"\nper_length = [0, 0, -1]\ntemperature = 10',
    'node = "C"\nforce = [0, 0, -1]\ndisplacement = [0, 0, 0]',
    'node = "C"',
    'path = ["A", "C"]\ntemperature = 3',
])
def test_load_of_no_known_form(tmp_path, body):
    text = BASE + f'\n[[loads]]\ncase = "p"\n{body}\n'
    expect_error(tmp_path, text, "loads[1]", "valid forms: self_weight = true")


def test_member_pattern_matching_nothing(tmp_path):
    text = BASE + '\n[[loads]]\ncase = "p"\nmembers = ["M1", "X*"]\nper_length = [0, 0, -1]\n'
    expect_error(tmp_path, text, "loads[1].members[1]", '"X*" matches no member')


def test_path_nodes_not_joined(tmp_path):
    text = BASE + '\n[[loads]]\ncase = "p"\npath = ["A", "C", "B"]\nper_length = [0, 0, -1]\n'
    expect_error(tmp_path, text, "loads[1].path[2]", 'nodes "C" and "B" are not joined by a member')


def test_patch_end_beyond_path(tmp_path):
    text = BASE + ('\n[[loads]]\ncase = "p"\npath = ["C", "M2.1", "M2.2"]\nstart = 1\nend = 11.5\n'
                   'per_length = [0, 0, -1]\n')
    expect_error(tmp_path, text, "loads[1].end", "beyond the path length")


def test_patch_start_after_end(tmp_path):
    text = BASE + ('\n[[loads]]\ncase = "p"\npath = ["C", "M2.1"]\nstart = 4\nend = 3\n'
                   'per_length = [0, 0, -1]\n')
    expect_error(tmp_path, text, "loads[1].end", "expected end > start (4 m), found 3")


def test_prescribed_movement_of_a_free_direction(tmp_path):
    text = BASE + '\n[[loads]]\ncase = "s"\nnode = "B"\ndisplacement = [0, 0, -0.02]\nrotation = [0, 0.01, 0]\n'
    expect_error(tmp_path, text, "loads[1].rotation[1]", 'node "B" is not restrained in ry (its support: x y z)')


def test_moment_on_a_node_without_rotations(tmp_path):
    text = BASE + '\n[[loads]]\ncase = "m"\nnode = "C"\nmoment = [0, 5, 0]\n'
    expect_error(tmp_path, text, "loads[1].moment", 'node "C" has no rotations')


def test_self_weight_false(tmp_path):
    expect_error(tmp_path, edit(BASE, "self_weight = true", "self_weight = false"), "loads[0].self_weight",
                 "expected true, found the boolean false")


def test_duplicate_combination_name(tmp_path):
    text = BASE + ('\n[[combinations]]\nname = "u"\nfactors = { dead = 1.35 }\n'
                   '\n[[combinations]]\nname = "u"\nfactors = { dead = 1.0 }\n')
    expect_error(tmp_path, text, "combinations[1].name", 'duplicate combination name "u" (first at combinations[0])')


def test_non_numeric_combination_factor(tmp_path):
    text = BASE + '\n[[combinations]]\nname = "u"\nfactors = { dead = "x" }\n'
    expect_error(tmp_path, text, "combinations[0].factors.dead", 'cannot read "x"')


# ---------------------------------------------------------------------------
# shape and analysis
# ---------------------------------------------------------------------------

def test_unknown_shape_method(tmp_path):
    text = BASE + '\n[shape]\nmethod = "targets"\n'
    expect_error(tmp_path, text, "shape.method",
                 'unknown form-finding method "targets" (known: target, force-density)')


def test_shape_keys_of_the_other_method(tmp_path):
    text = BASE + '\n[shape]\nmethod = "force-density"\nforce_density = { "M*" = 10 }\n[shape.targets]\nC = { z = 1 }\n'
    expect_error(tmp_path, text, "shape.targets", 'belongs to method "target"')


def test_force_density_pattern_matching_nothing(tmp_path):
    text = BASE + '\n[shape]\nmethod = "force-density"\nforce_density = { "N*" = 10 }\n'
    expect_error(tmp_path, text, 'shape.force_density."N*"', '"N*" matches no member')


@pytest.mark.parametrize("body, key, fragment", [
    ("increments = 0", "analysis.increments", "expected a positive integer, found the number 0"),
    ("tolerance = -1e-8", "analysis.tolerance", "expected a positive value"),
    ("max_iterations = 2.5", "analysis.max_iterations", "expected a positive integer"),
    ('solver = "mumps"', "analysis.solver", 'unknown linear solver "mumps" (known: auto, superlu'),
    ("max_cuts = -1", "analysis.max_cuts", "expected an integer >= 0"),
])
def test_bad_analysis_settings(tmp_path, body, key, fragment):
    expect_error(tmp_path, BASE + f"\n[analysis]\n{body}\n", key, fragment)


# ---------------------------------------------------------------------------
# compact tables: bad input
# ---------------------------------------------------------------------------

def test_node_table_column_of_wrong_length(tmp_path):
    text = BASE + '\n[node_table]\nids = ["D", "E", "F"]\nx = [1.0, 2.0]\ny = [0, 0, 0]\nz = [0, 0, 0]\n'
    expect_error(tmp_path, text, "node_table.x", "expected 3 numbers (as many as ids), found 2")


def test_node_table_takes_bare_numbers(tmp_path):
    text = BASE + '\n[node_table]\nids = ["D"]\nx = [1.0]\ny = [0.0]\nz = ["1 m"]\n'
    expect_error(tmp_path, text, "node_table.z[0]", "compact tables take bare numbers")


def test_node_table_ids_must_be_strings(tmp_path):
    text = BASE + '\n[node_table]\nids = ["D", 7]\nx = [1.0, 2.0]\ny = [0, 0]\nz = [0, 0]\n'
    expect_error(tmp_path, text, "node_table.ids[1]", "expected a string, found the number 7")


def test_node_table_duplicate_id(tmp_path):
    text = BASE + '\n[node_table]\nids = ["D", "E", "D"]\nx = [1.0, 2.0, 3.0]\ny = [0, 0, 0]\nz = [0, 0, 0]\n'
    expect_error(tmp_path, text, "node_table.ids[2]", 'duplicate node id "D" (first at node_table.ids[0])')


def test_member_table_unknown_node(tmp_path):
    text = BASE + ('\n[[member_table]]\ntype = "bar"\nsection = "hanger"\nids = ["T1", "T2"]\n'
                   'i = ["A", "C"]\nj = ["B", "Q"]\n')
    expect_error(tmp_path, text, "member_table[0].j[1]", 'no node named "Q"')


def test_member_table_duplicate_id_with_long_form(tmp_path):
    text = BASE + ('\n[[member_table]]\ntype = "bar"\nsection = "hanger"\nids = ["T1", "M2"]\n'
                   'i = ["A", "C"]\nj = ["B", "A"]\n')
    expect_error(tmp_path, text, "member_table[0].ids[1]", 'duplicate member id "M2" (first at members[1])')


def test_member_table_zero_length(tmp_path):
    text = BASE + ('\n[[member_table]]\ntype = "bar"\nsection = "hanger"\nids = ["T1", "T2"]\n'
                   'i = ["A", "C"]\nj = ["B", "C"]\n')
    expect_error(tmp_path, text, "member_table[0].ids[1]", 'member "T2" has zero length: both ends are node "C"')


def test_member_table_non_positive_length0(tmp_path):
    text = BASE + ('\n[[member_table]]\ntype = "bar"\nsection = "hanger"\nids = ["T1", "T2"]\n'
                   'i = ["A", "C"]\nj = ["B", "A"]\nlength0 = [40.0, -1.0]\n')
    expect_error(tmp_path, text, "member_table[0].length0[1]", "expected a positive value")


# ---------------------------------------------------------------------------
# positive: the interface example, in SI
# ---------------------------------------------------------------------------

EXAMPLE = """\
title = "Hillside walk, option 2"

[units]
length = "m"
force = "kN"

[materials.strand]
E = "160 GPa"
unit_weight = "78.5 kN/m^3"
alpha = 1.2e-5

[materials.steel]
E = 210e6
density = "8000 kg/m^3"
alpha = "1.2e-5 1/delta_degC"

[sections.main]
material = "strand"
area = "1960 mm^2"
weight = "0.165 kN/m"
breaking_load = "2900 kN"
diameter = "60 mm"

[sections.hanger]
material = "strand"
area = "380 mm^2"

[sections.deck]
material = "steel"
area = 0.012
Iy = "2.1e8 mm^4"
Iz = 1.5e-3
J = "3e8 mm^4"

[nodes]
A = [0, 0, 12]
B = [80, 0, 12]
D0 = [0, 0, 0]
D1 = [10, 0, 0]
D2 = [20, 0, 0]
D3 = [30, 0, 0]
D7 = [70, 0, 0]
D8 = [80, 0, 0]

[supports]
A = "x y z"
B = "all"
D0 = "pin"
D8 = "y z"

[[members]]
id = "M1"
type = "cable"
nodes = ["A", "B"]
section = "main"
length0 = 82.5
divide = 8

[[members]]
id = "H1"
type = "bar"
nodes = ["M1.1", "D1"]
section = "hanger"
tension_only = true

[[members]]
id = "H7"
type = "bar"
nodes = ["M1.7", "D7"]
section = "hanger"
pretension = 300

[[members]]
id = "D1"
type = "beam"
nodes = ["D0", "D1"]
section = "deck"
up = [0, 0, 1]

[[members]]
id = "D2"
type = "beam"
nodes = ["D1", "D2"]
section = "deck"

[[members]]
id = "D3"
type = "beam"
nodes = ["D2", "D3"]
section = "deck"
divide = 2

[[members]]
id = "D8"
type = "beam"
nodes = ["D7", "D8"]
section = "deck"

[[loads]]
case = "dead"
self_weight = true

[[loads]]
case = "live"
node = "B"
force = [0, 0, -10]

[[loads]]
case = "deck"
members = ["D*"]
per_length = [0, 0, -4.5]

[[loads]]
case = "crowd-left"
path = ["D0", "D1", "D2", "D3.1", "D3"]
start = 0.0
end = 25.0
per_length = [0, 0, -5.0]

[[loads]]
case = "cold"
members = ["M*"]
temperature = -25

[[loads]]
case = "settle"
node = "B"
displacement = [0, 0, -0.02]

[[loads]]
case = "settle"
node = "D8"
displacement = ["0 mm", 0, "-15 mm"]

[[loads]]
case = "twist"
node = "D1"
moment = ["2 kN*m", 0, 0]

[[combinations]]
name = "service-left"
factors = { dead = 1.0, deck = 1.0, crowd-left = 1.0 }

[shape]
method = "target"
permanent = ["dead", "deck"]
tolerance = 1e-4
fabrication_temperature = "-10 delta_degC"

[shape.targets]
D7 = { z = 0.0 }
"M1.4" = { x = 40.0, z = "4000 mm" }

[[shape.adjust]]
members = "H*"
[[shape.adjust]]
members = "M*"
together = true

[analysis]
increments = 10
tolerance = 1e-8
max_iterations = 30
solver = "superlu"

[report]
deck = ["D*"]
"""


def si(text, unit):
    """Outside reference: pint's own conversion of a quantity text to ``unit``."""
    return registry().Quantity(text).to(unit).magnitude


def test_interface_example_in_si(tmp_path, verify):
    spec = read_case(write(tmp_path, EXAMPLE))
    strand, steel = spec.materials["strand"], spec.materials["steel"]
    # source: pint unit definitions (SI prefixes per BIPM 2019, The International System of Units, 9th ed., Table 7)
    verify.check('example case: E = "160 GPa" read in Pa', "pint unit definitions (SI prefixes per BIPM "
                 "2019, The International System of Units, 9th ed., Table 7)", strand.E, si("160 GPa", "Pa"),
                 rtol=RTOL_UNITS, unit="Pa")
    assert_allclose(strand.E, 160e9, rtol=RTOL_UNITS)
    assert_allclose(strand.G, strand.E / 2.6, rtol=RTOL_UNITS)  # default of the interface page
    verify.check('example case: unit_weight = "78.5 kN/m^3" read in N/m^3', "pint unit definitions",
                 strand.unit_weight, si("78.5 kN/m^3", "N/m^3"), rtol=RTOL_UNITS, unit="N/m^3")
    assert_allclose(steel.E, 210e9, rtol=RTOL_UNITS)            # bare number: kN/m^2
    # source: 3rd CGPM 1901, standard acceleration of gravity g_n = 9.80665 m/s^2
    # (scipy.constants.g holds the same conventional value)
    verify.check("example case: density 8000 kg/m^3 turned into a unit weight with standard gravity",
                 "3rd CGPM 1901, g_n = 9.80665 m/s^2 (scipy.constants.g; pint g_0)",
                 [steel.unit_weight] * 2, [8000 * const.g, si("8000 kg/m^3 * g_0", "N/m^3")],
                 rtol=RTOL_UNITS, unit="N/m^3")
    assert_allclose(steel.alpha, 1.2e-5, rtol=RTOL_UNITS)
    main, deck = spec.sections["main"], spec.sections["deck"]
    assert_allclose(main.area, 1960e-6, rtol=RTOL_UNITS)
    assert_allclose(main.weight, 165.0, rtol=RTOL_UNITS)
    assert_allclose(main.breaking_load, 2.9e6, rtol=RTOL_UNITS)
    assert_allclose(main.diameter, 0.06, rtol=RTOL_UNITS)
    assert_allclose([deck.Iy, deck.Iz, deck.J], [2.1e-4, 1.5e-3, 3e-4], rtol=RTOL_UNITS)
    assert spec.supports["D0"] == (True, True, True, False, False, False)
    assert spec.supports["B"] == (True,) * 6
    assert spec.supports["D8"] == (False, True, True, False, False, False)

    members = {m.id: m for m in spec.members}
    assert members["M1"].divide == 8 and members["M1"].length0 == 82.5
    assert members["H1"].tension_only and members["H1"].nodes == ("M1.1", "D1")
    assert_allclose(members["H7"].pretension, 3e5, rtol=RTOL_UNITS)
    assert members["D1"].up == (0.0, 0.0, 1.0) and members["D2"].up is None
    assert members["D3"].key == "members[5]"

    loads = spec.loads
    assert isinstance(loads[0], SelfWeight) and loads[0].factor == 1.0
    assert isinstance(loads[1], NodalLoad)
    assert_allclose(loads[1].force, (0, 0, -1e4), rtol=RTOL_UNITS)
    assert isinstance(loads[2], MemberLoad) and loads[2].members == ("D*",)
    assert_allclose(loads[2].per_length, (0, 0, -4500), rtol=RTOL_UNITS)
    assert isinstance(loads[3], PatchLoad) and loads[3].path[3] == "D3.1"
    assert (loads[3].start, loads[3].end) == (0.0, 25.0)
    assert isinstance(loads[4], TemperatureLoad) and loads[4].delta_t == -25.0
    assert isinstance(loads[5], PrescribedDisplacement)
    assert loads[5].displacement == (0.0, 0.0, -0.02) and loads[5].rotation is None
    # D8 is free in x: a zero there means "not prescribed"
    assert loads[6].displacement[0] is None
    assert_allclose(loads[6].displacement[2], -0.015, rtol=RTOL_UNITS)
    assert_allclose(loads[7].moment, (2000.0, 0.0, 0.0), rtol=RTOL_UNITS)
    assert spec.load_cases == ("dead", "live", "deck", "crowd-left", "cold", "settle", "twist")

    assert spec.combinations[0].factors == {"dead": 1.0, "deck": 1.0, "crowd-left": 1.0}
    shape = spec.shape
    assert shape.method == "target" and shape.permanent == ("dead", "deck")
    assert shape.targets == {"D7": {"z": 0.0}, "M1.4": {"x": 40.0, "z": pytest.approx(4.0, rel=RTOL_UNITS)}}
    assert [(g.members, g.together) for g in shape.adjust] == [(("H*",), False), (("M*",), True)]
    assert shape.fabrication_temperature == pytest.approx(-10.0, rel=RTOL_UNITS)
    assert spec.analysis.solver == "superlu" and spec.analysis.increments == 10
    assert spec.extra == {"report": {"deck": ["D*"]}}
    assert spec.nodes["A"] == (0.0, 0.0, 12.0) and "M1.1" not in spec.nodes


def test_interior_nodes_lie_evenly_on_the_chord(tmp_path):
    spec = read_case(write(tmp_path, EXAMPLE))
    inner = interior_nodes(spec)
    assert list(inner)[:7] == [f"M1.{k}" for k in range(1, 8)]
    expected = [(10.0 * k, 0.0, 12.0) for k in range(1, 8)]
    assert_allclose([inner[f"M1.{k}"] for k in range(1, 8)], expected, rtol=1e-15, atol=1e-12)
    assert_allclose(inner["D3.1"], (25.0, 0.0, 0.0), rtol=1e-15)


def test_given_interior_coordinates_are_kept(tmp_path):
    text = edit(BASE, "divide = 4", "divide = 3\ninterior = [[26, 0, 2], [33, 0, 6]]")
    text += '\n[[loads]]\ncase = "p"\npath = ["C", "M2.1", "M2.2"]\nper_length = [0, 0, -1]\nend = "12 m"\n'
    spec = read_case(write(tmp_path, text))
    assert spec.members[1].interior == ((26.0, 0.0, 2.0), (33.0, 0.0, 6.0))
    # path length from the given points: |(6, 0, 2)| + |(7, 0, 4)|
    text_long = edit(text, 'end = "12 m"', 'end = 14.6')
    expect_error(tmp_path, text_long, "loads[1].end",
                 f"beyond the path length {math.hypot(6, 2) + math.hypot(7, 4):.6g} m")


def test_interior_nodes_as_ends_of_other_members_and_in_loads(tmp_path):
    text = BASE + ('\n[[members]]\nid = "H"\ntype = "bar"\nnodes = ["M2.2", "M1"]\nsection = "hanger"\n')
    # "M1" is a member, not a node: the member's own id is no node id
    expect_error(tmp_path, text, "members[2].nodes[1]", 'no node named "M1"')
    text = edit(BASE, "C = [20, 0, 0]\n", "C = [20, 0, 0]\nG = [30, 0, -8]\n")
    text += ('\n[[members]]\nid = "H"\ntype = "bar"\nnodes = ["M2.2", "G"]\nsection = "hanger"\n'
             '\n[[loads]]\ncase = "p"\nnode = "M2.3"\nforce = [0, 0, -2]\n'
             '\n[[loads]]\ncase = "q"\npath = ["C", "M2.1", "M2.2", "G"]\nper_length = [0, 0, -1]\n')
    spec = read_case(write(tmp_path, text))
    assert spec.members[2].nodes == ("M2.2", "G")
    assert spec.loads[1].node == "M2.3"
    assert spec.loads[2].end is None


def test_supports_and_targets_may_name_interior_nodes(tmp_path):
    text = edit(BASE, 'B = "x y z"', 'B = "x y z"\n"M2.2" = "z"')
    text += '\n[[loads]]\ncase = "s"\nnode = "M2.2"\ndisplacement = [0, 0, "-5 mm"]\n'
    spec = read_case(write(tmp_path, text))
    assert spec.supports["M2.2"] == (False, False, True, False, False, False)
    assert spec.loads[1].displacement == (None, None, pytest.approx(-0.005, rel=RTOL_UNITS))


def test_parse_case_does_not_touch_its_input(tmp_path):
    import tomli

    data = tomli.loads(EXAMPLE)
    before = copy.deepcopy(data)
    spec = parse_case(data, source="memory")
    assert data == before
    assert spec.raw is data and spec.source == "memory"


def test_parse_case_errors_carry_the_source():
    with pytest.raises(CaseError) as info:
        parse_case({"nodes": {"A": [0, 0]}}, source="from-notebook")
    assert (info.value.file, info.value.key) == ("from-notebook", "nodes.A")


def test_match_members_takes_ids_and_patterns():
    ids = ["H1", "H2", "M1", "D[1]"]
    assert match_members(["H*", "D[1]"], ids) == ["H1", "H2", "D[1]"]
    assert match_members("M?", ids) == ["M1"]


# ---------------------------------------------------------------------------
# units module against outside references
# ---------------------------------------------------------------------------

def test_unit_system_scales_against_scipy_constants(verify):
    # source: scipy.constants (NIST SP 811, 2008, Appendix B: foot, inch, pound-force, kilogram-force)
    us = unit_system({"length": "ft", "force": "lbf"})
    source = "scipy.constants (NIST SP 811, 2008, Appendix B)"
    verify.check("[units] ft and lbf: length and force scales to m and N", source,
                 [us.length_scale, us.force_scale], [const.foot, const.pound_force], rtol=RTOL_UNITS)
    us = unit_system({"length": "in", "force": "kgf"})
    verify.check("[units] in and kgf: length and force scales to m and N", source,
                 [us.length_scale, us.force_scale], [const.inch, const.kgf], rtol=RTOL_UNITS)
    assert unit_system(None) == UnitSystem("m", "kN", 1.0, 1000.0)


def test_bare_numbers_of_derived_kinds_follow_the_file_units():
    us = unit_system({"length": "mm", "force": "N"})
    q = Quantities(us)
    # N/mm^2 = MPa, N/mm = kN/m, N/mm^3, N mm, mm^4
    assert_allclose(q.to_si(1.0, "stress", "k"), 1e6, rtol=RTOL_UNITS)
    assert_allclose(q.to_si(1.0, "force_per_length", "k"), 1e3, rtol=RTOL_UNITS)
    assert_allclose(q.to_si(1.0, "unit_weight", "k"), 1e9, rtol=RTOL_UNITS)
    assert_allclose(q.to_si(1.0, "moment", "k"), 1e-3, rtol=RTOL_UNITS)
    assert_allclose(q.to_si(1.0, "second_moment", "k"), 1e-12, rtol=RTOL_UNITS)
    assert_allclose(q.to_si(1.0, "area", "k"), 1e-6, rtol=RTOL_UNITS)
    # kinds with a fixed unit
    assert q.to_si(-25, "temperature_difference", "k") == -25.0
    assert q.to_si(7850, "density", "k") == 7850.0


def test_temperature_differences_in_other_scales(verify):
    q = Quantities(UnitSystem())
    # source: NIST SP 811 (2008), B.9: a Fahrenheit interval is 5/9 K
    verify.check("temperature difference -45 delta_degF in K", "NIST SP 811 (2008), B.9 (a Fahrenheit "
                 "interval is 5/9 K)", q.to_si("-45 delta_degF", "temperature_difference", "k"), -25.0,
                 rtol=RTOL_UNITS, unit="K")
    verify.check("thermal expansion 6.5e-6 per delta_degF in 1/K", "NIST SP 811 (2008), B.9",
                 q.to_si("6.5e-6 1/delta_degF", "thermal_expansion", "k"), 6.5e-6 * 9 / 5, rtol=RTOL_UNITS,
                 unit="1/K")
    assert_allclose(q.to_si("30 deg", "angle", "k"), math.pi / 6, rtol=RTOL_UNITS)
    assert_allclose(q.to_si("5 %", "dimensionless", "k"), 0.05, rtol=RTOL_UNITS)
    assert_allclose(q.to_si("1.2e-5/K", "thermal_expansion", "k"), 1.2e-5, rtol=RTOL_UNITS)
    assert STANDARD_GRAVITY == const.g


LENGTHS = ["m", "mm", "cm", "km", "ft", "in"]
FORCES = ["N", "kN", "MN", "lbf", "kip", "kgf"]


@settings(max_examples=25, deadline=None)
@given(length=st.sampled_from(LENGTHS), force=st.sampled_from(FORCES),
       scale=st.floats(min_value=0.25, max_value=4.0))
def test_unit_choice_does_not_change_si_values(tmp_path_factory, length, force, scale):
    """The same structure written in any [units] reads to the same SI case."""
    L = registry().Quantity(1.0, length).to("m").magnitude   # source: pint unit definitions
    F = registry().Quantity(1.0, force).to("N").magnitude
    si_values = {"x": 40.0 * scale, "z": 10.0 * scale, "E": 160e9 * scale, "gamma": 78.5e3 * scale,
                 "area": 1.96e-3 * scale, "weight": 165.0 * scale, "P": 1.0e4 * scale,
                 "w": 4.5e3 * scale, "M": 2.0e3 * scale, "l0": 45.0 * scale}

    def bare(name, l_power, f_power):
        return repr(si_values[name] / (L ** l_power * F ** f_power))

    text = f"""
[units]
length = "{length}"
force = "{force}"
[materials.s]
E = {bare("E", -2, 1)}
unit_weight = {bare("gamma", -3, 1)}
[sections.c]
material = "s"
area = {bare("area", 2, 0)}
weight = {bare("weight", -1, 1)}
Iy = 1.0
Iz = 1.0
J = 1.0
[nodes]
A = [0, 0, {bare("z", 1, 0)}]
B = [{bare("x", 1, 0)}, 0, {bare("z", 1, 0)}]
[supports]
A = "all"
[[members]]
id = "C1"
type = "cable"
nodes = ["A", "B"]
section = "c"
length0 = {bare("l0", 1, 0)}
[[members]]
id = "G1"
type = "beam"
nodes = ["A", "B"]
section = "c"
[[loads]]
case = "p"
node = "B"
force = [0, 0, {bare("P", 0, 1)}]
moment = [{bare("M", 1, 1)}, 0, 0]
[[loads]]
case = "w"
members = "C*"
per_length = [0, {bare("w", -1, 1)}, 0]
"""
    path = tmp_path_factory.mktemp("units") / "case.toml"
    path.write_text(text)
    spec = read_case(path)
    got = [spec.nodes["B"][0], spec.nodes["B"][2], spec.materials["s"].E, spec.materials["s"].unit_weight,
           spec.sections["c"].area, spec.sections["c"].weight, spec.loads[0].force[2], spec.loads[1].per_length[1],
           spec.loads[0].moment[0], spec.members[0].length0]
    want = [si_values[k] for k in ("x", "z", "E", "gamma", "area", "weight", "P", "w", "M", "l0")]
    assert_allclose(got, want, rtol=RTOL_UNITS)
    assert spec.units.length == length and spec.units.force == force


# ---------------------------------------------------------------------------
# compact tables
# ---------------------------------------------------------------------------

def _net(n):
    """Nodes and members of an n x n grid net as plain lists."""
    ids = [f"N{i}_{j}" for i in range(n) for j in range(n)]
    xyz = [(1.5 * i, 2.0 * j, 0.1 * (i - j) ** 2) for i in range(n) for j in range(n)]
    members = []
    for i in range(n):
        for j in range(n):
            if i + 1 < n:
                members.append((f"E{i}_{j}", f"N{i}_{j}", f"N{i + 1}_{j}"))
            if j + 1 < n:
                members.append((f"F{i}_{j}", f"N{i}_{j}", f"N{i}_{j + 1}"))
    return ids, xyz, members


HEAD = """\
[units]
length = "mm"
force = "N"
[materials.s]
E = "160 GPa"
unit_weight = "78.5 kN/m^3"
[sections.net]
material = "s"
area = "50 mm^2"
[supports]
N0_0 = "pin"
"""


def test_compact_tables_equal_the_long_form(tmp_path):
    ids, xyz, members = _net(4)
    length0 = [1500.0 + k for k in range(len(members))]
    long_form = HEAD + "[nodes]\n" + "".join(f'{n} = [{x!r}, {y!r}, {z!r}]\n' for n, (x, y, z) in zip(ids, xyz))
    long_form += "".join(f'[[members]]\nid = "{m}"\ntype = "bar"\nnodes = ["{a}", "{b}"]\nsection = "net"\n'
                         f"tension_only = true\nlength0 = {l0!r}\n"
                         for (m, a, b), l0 in zip(members, length0))
    compact = HEAD + "[node_table]\n" + f"ids = {json.dumps(ids)}\n" + "".join(
        f"{c} = {json.dumps([p[k] for p in xyz])}\n" for k, c in enumerate("xyz"))
    compact += ('[[member_table]]\ntype = "bar"\nsection = "net"\ntension_only = true\n'
                f"ids = {json.dumps([m[0] for m in members])}\n"
                f"i = {json.dumps([m[1] for m in members])}\nj = {json.dumps([m[2] for m in members])}\n"
                f"length0 = {json.dumps(length0)}\n")
    a = read_case(write(tmp_path, long_form, "long.toml"))
    b = read_case(write(tmp_path, compact, "compact.toml"))
    assert a.nodes == b.nodes
    assert len(a.members) == len(members) == 24
    assert [dataclasses.replace(m, key="") for m in a.members] == [dataclasses.replace(m, key="") for m in b.members]
    assert b.members[5].key == "member_table[0].ids[5]"
    assert_allclose(b.members[5].length0, 1.505, rtol=RTOL_UNITS)     # mm -> m
    assert_allclose(b.nodes["N1_2"], (1.5e-3, 4.0e-3, 0.1e-3), rtol=RTOL_UNITS)


def test_compact_and_long_forms_mix(tmp_path):
    text = BASE + ('\n[node_table]\nids = ["P", "R"]\nx = [0.0, 40.0]\ny = [5.0, 5.0]\nz = [0.0, 0.0]\n'
                   '\n[[member_table]]\ntype = "cable"\nsection = "hanger"\nids = ["T1", "T2"]\n'
                   'i = ["P", "M2.1"]\nj = ["C", "R"]\npretension = "2 kN"\n'
                   '\n[[loads]]\ncase = "p"\nmembers = "T*"\nper_length = [0, 0, -1]\n')
    spec = read_case(write(tmp_path, text))
    assert [m.id for m in spec.members] == ["M1", "M2", "T1", "T2"]
    assert spec.members[3].nodes == ("M2.1", "R") and spec.members[3].pretension == 2000.0
    assert list(spec.nodes) == ["A", "B", "C", "P", "R"]


def test_big_compact_net_reads(tmp_path):
    ids, xyz, members = _net(60)
    text = HEAD + "[node_table]\n" + f"ids = {json.dumps(ids)}\n" + "".join(
        f"{c} = {json.dumps([p[k] for p in xyz])}\n" for k, c in enumerate("xyz"))
    text += ('[[member_table]]\ntype = "cable"\nsection = "net"\n'
             f"ids = {json.dumps([m[0] for m in members])}\n"
             f"i = {json.dumps([m[1] for m in members])}\nj = {json.dumps([m[2] for m in members])}\n")
    text += ('[[loads]]\ncase = "dead"\nself_weight = true\n'
             '[[loads]]\ncase = "edge"\nmembers = "E0_*"\nper_length = [0, 0, -1]\n')
    spec = read_case(write(tmp_path, text))
    assert len(spec.nodes) == 3600 and len(spec.members) == 2 * 60 * 59
    assert spec.members[-1].nodes == ("N59_58", "N59_59")


def test_python_floor_matches_the_toml_imports():
    """pyproject.toml allows Python 3.10, which has no tomllib: code and tests read TOML
    with tomli (a declared dependency); tomllib only as a guarded fallback."""
    from pathlib import Path

    import tomli

    root = Path(__file__).resolve().parent.parent
    project = tomli.loads((root / "pyproject.toml").read_text(encoding="utf-8"))["project"]
    assert project["requires-python"] == ">=3.10"
    assert any(dep.startswith("tomli>=") for dep in project["dependencies"])
    for path in [*(root / "cablefe").rglob("*.py"), *(root / "tests").rglob("*.py"),
                 *(root / "benchmarks").rglob("*.py")]:
        lines = path.read_text(encoding="utf-8").splitlines()
        for k, line in enumerate(lines):
            if line.strip() in ("import tomllib", "import tomllib as _toml") or line.strip().startswith("from tomllib"):
                assert k > 0 and lines[k - 1].strip().startswith("except ImportError"), f"{path}:{k + 1}"
