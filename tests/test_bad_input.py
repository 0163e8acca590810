"""The bad-input corpus: every malformed case gives exit 2, one line on stderr
naming the file and the key path, no traceback, and nothing in the output folder.

Each entry is (name, case text, expected key path, extra command-line
arguments).  The texts are small edits of two valid bases (a divided cable,
and a beam with a bar), so that each entry fails for the one reason it is
named after; ``test_bases_are_valid`` checks the bases themselves.
"""
from pathlib import Path

import pytest

from cablefe.cli import main

CASES = Path(__file__).resolve().parent.parent / "cases"
CABLE = (CASES / "heavy_cable.toml").read_text()

BEAM = """
title = "Beam and tie"
[materials.steel]
E = "210 GPa"
unit_weight = "78.5 kN/m^3"
alpha = 1.2e-5

[sections.box]
material = "steel"
area = "0.01 m^2"
Iy = 1e-4
Iz = 1e-4
J = 1e-4

[sections.rod]
material = "steel"
area = "500 mm^2"

[nodes]
A = [0, 0, 0]
B = [5, 0, 0]
C = [5, 0, 3]

[supports]
A = "all"
C = "pin"

[[members]]
id = "G1"
type = "beam"
nodes = ["A", "B"]
section = "box"
divide = 4

[[members]]
id = "R1"
type = "bar"
nodes = ["B", "C"]
section = "rod"

[[loads]]
case = "dead"
self_weight = true

[[loads]]
case = "tip"
node = "B"
force = [0, 0, -5]

[[combinations]]
name = "service"
factors = { dead = 1.0, tip = 1.0 }
"""

NO_MEMBERS = """
[materials.steel]
E = "210 GPa"
[sections.rod]
material = "steel"
area = "500 mm^2"
[nodes]
A = [0, 0, 0]
B = [5, 0, 0]
[supports]
A = "all"
"""


def edit(base, old, new):
    assert old in base, old
    return base.replace(old, new, 1)


def cable(old, new):
    return edit(CABLE, old, new)


def beam(old, new):
    return edit(BEAM, old, new)


LONE = cable("East = [220, 0, 65]", "East = [220, 0, 65]\nLone = [5, 5, 5]")

CORPUS = [
    # --- the file as a whole: parser failures, emptiness -------------------------------------------
    ("syntax-error", cable('title = "Gorge', 'title = = "Gorge'), "", ()),
    ("duplicate-key", cable("divide = 10 ", "divide = 10\ndivide = 11 "), "", ()),
    ("duplicate-table", CABLE + '\n[materials.strand]\nE = "1 GPa"\n', "", ()),
    ("nested-arrays", CABLE + "\njunk = " + "[" * 3000 + "]" * 3000 + "\n", "", ()),
    ("nested-inline-tables", CABLE + "\njunk = " + "{a = " * 3000 + "1" + "}" * 3000 + "\n", "", ()),
    ("not-utf8", CABLE.encode() + b"\n# \xff\xfe\n", "", ()),
    ("binary-junk", bytes(range(256)), "", ()),
    ("empty-file", "", "members", ()),
    ("title-only", 'title = "nothing here"\n', "members", ()),
    ("nodes-but-no-members", NO_MEMBERS, "members", ()),
    ("members-empty-array", "members = []\n" + NO_MEMBERS, "members", ()),
    ("member-table-without-ids", NO_MEMBERS + '[[member_table]]\ntype = "bar"\nsection = "rod"\n'
     'ids = []\ni = []\nj = []\n', "members", ()),
    ("unknown-array-of-tables", cable('[[loads]]\ncase = "self-weight"', '[[load]]\ncase = "self-weight"'),
     "load", ()),
    ("nothing-to-solve", "\n".join(line for line in BEAM.splitlines()
                                   if not line.startswith(("[[loads", "[[comb", "case", "self_weight", "node =",
                                                           "force", "name", "factors"))), "loads", ()),
    # --- top-level tables ---------------------------------------------------------------------------
    ("unknown-top-level-key", CABLE + "\n[sollver]\nx = 1\n", "sollver", ()),
    ("title-not-a-string", cable('title = "Gorge', 'title = 5 # "Gorge'), "title", ()),
    ("design-unknown-key", CABLE + "\n[design]\nfactor_of_everything = 1.5\n", "design.factor_of_everything", ()),
    ("studies-not-an-array", CABLE + '\n[studies]\nkind = "x"\n', "studies", ()),
    ("studies-unknown-kind", CABLE + '\n[[studies]]\nname = "a"\nkind = "x"\n', "studies[0].kind", ()),
    ("modes-count-zero", CABLE + "\n[modes]\ncount = 0\n", "modes.count", ()),
    ("report-unknown-key", CABLE + '\n[report]\ndeck = ["C1.*"]\nplots = true\n', "report.plots", ()),
    ("report-not-a-table", 'report = "deck"\n' + CABLE, "report", ()),
    ("report-deck-matches-nothing", CABLE + '\n[report]\ndeck = ["C1.*", "Q*"]\n', "report.deck[1]", ()),
    ("report-deck-wrong-type", CABLE + "\n[report]\ndeck = 5\n", "report.deck", ()),
    ("report-deck-empty", CABLE + "\n[report]\ndeck = []\n", "report.deck", ()),
    # --- units --------------------------------------------------------------------------------------
    ("unknown-length-unit", cable('length = "m"', 'length = "metres-ish"'), "units.length", ()),
    ("length-unit-is-a-force", cable('length = "m"', 'length = "kN"'), "units.length", ()),
    ("units-unknown-key", cable('force = "kN"', 'force = "kN"\ntime = "s"'), "units.time", ()),
    ("units-not-a-table", cable('[units]\nlength = "m"\nforce = "kN"', 'units = "SI"'), "units", ()),
    # --- materials and sections ---------------------------------------------------------------------
    ("E-missing", cable('E = "160 GPa"', 'G = "60 GPa"'), "materials.strand.E", ()),
    ("E-negative", cable('E = "160 GPa"', 'E = "-160 GPa"'), "materials.strand.E", ()),
    ("E-wrong-dimension", cable('E = "160 GPa"', 'E = "160 m"'), "materials.strand.E", ()),
    ("E-nan-text", cable('E = "160 GPa"', 'E = "nan GPa"'), "materials.strand.E", ()),
    ("E-inf", cable('E = "160 GPa"', "E = inf"), "materials.strand.E", ()),
    ("E-boolean", cable('E = "160 GPa"', "E = true"), "materials.strand.E", ()),
    ("density-and-unit-weight", cable('unit_weight = "78.5 kN/m^3"',
                                      'unit_weight = "78.5 kN/m^3"\ndensity = 8000'), "materials.strand.density", ()),
    ("alpha-junk", cable("alpha = 1.2e-5", 'alpha = "lots"'), "materials.strand.alpha", ()),
    ("material-not-a-table", "materials = { strand = 5 }\n" + cable(
        '[materials.strand]\nE = "160 GPa"\nunit_weight = "78.5 kN/m^3"\nalpha = 1.2e-5', ""), "materials.strand", ()),
    ("section-unknown-material", cable('material = "strand"', 'material = "strnad"'), "sections.rope.material", ()),
    ("area-zero", cable('area = "2200 mm^2"', "area = 0"), "sections.rope.area", ()),
    ("area-nan", cable('area = "2200 mm^2"', "area = nan"), "sections.rope.area", ()),
    ("area-array", cable('area = "2200 mm^2"', "area = [1, 2]"), "sections.rope.area", ()),
    ("breaking-load-negative", cable('breaking_load = "3400 kN"', "breaking_load = -3400"),
     "sections.rope.breaking_load", ()),
    ("stiffness-overflow", cable('E = "160 GPa"', "E = 1e300").replace('area = "2200 mm^2"', "area = 1e10"),
     "sections.rope.area", ()),
    ("beam-section-without-Iy", beam("Iy = 1e-4\n", ""), "members[0].section", ()),
    ("Iy-negative", beam("Iy = 1e-4", "Iy = -1e-4"), "sections.box.Iy", ()),
    # --- nodes --------------------------------------------------------------------------------------
    ("coordinate-count", cable("East = [220, 0, 65]", "East = [220, 65]"), "nodes.East", ()),
    ("coordinate-junk", cable("East = [220, 0, 65]", 'East = [220, 0, "high"]'), "nodes.East[2]", ()),
    ("coordinate-nan", cable("East = [220, 0, 65]", "East = [220, 0, nan]"), "nodes.East[2]", ()),
    ("coordinate-inf", cable("East = [220, 0, 65]", "East = [220, -inf, 65]"), "nodes.East[1]", ()),
    ("coordinate-far", cable("East = [220, 0, 65]", "East = [1e300, 0, 65]"), "nodes.East", ()),
    ("node-as-table", cable("East = [220, 0, 65]", "East = { x = 220 }"), "nodes.East", ()),
    ("node-table-lengths", CABLE + "\n[node_table]\nids = [\"P\", \"Q\"]\nx = [1.0]\ny = [0.0, 0.0]\n"
     "z = [0.0, 0.0]\n", "node_table.x", ()),
    ("node-table-duplicate", CABLE + "\n[node_table]\nids = [\"West\"]\nx = [1.0]\ny = [0.0]\nz = [0.0]\n",
     "node_table.ids[0]", ()),
    ("node-table-text-number", CABLE + "\n[node_table]\nids = [\"P\"]\nx = [\"1 m\"]\ny = [0.0]\nz = [0.0]\n",
     "node_table.x[0]", ()),
    # --- members ------------------------------------------------------------------------------------
    ("member-without-id", cable('id = "C1"\n', ""), "members[0].id", ()),
    ("member-unknown-type", cable('type = "cable"', 'type = "rope"'), "members[0].type", ()),
    ("member-unknown-node", cable('nodes = ["West", "East"]', 'nodes = ["West", "Est"]'), "members[0].nodes[1]", ()),
    ("member-three-nodes", cable('nodes = ["West", "East"]', 'nodes = ["West", "East", "West"]'),
     "members[0].nodes", ()),
    ("member-same-node-twice", cable('nodes = ["West", "East"]', 'nodes = ["West", "West"]'), "members[0].nodes", ()),
    ("member-zero-length", cable("East = [220, 0, 65]", "East = [0, 0, 40]"), "members[0].nodes", ()),
    ("member-unknown-section", cable('section = "rope"', 'section = "rpoe"'), "members[0].section", ()),
    ("divide-zero", cable("divide = 10 ", "divide = 0 "), "members[0].divide", ()),
    ("divide-float", cable("divide = 10 ", "divide = 1e8 "), "members[0].divide", ()),
    ("divide-absurd", cable("divide = 10 ", "divide = 100000000 "), "members[0].divide", ()),
    ("length0-negative", cable("length0 = 229.0", "length0 = -229.0"), "members[0].length0", ()),
    ("length0-and-pretension", cable("length0 = 229.0", "length0 = 229.0\npretension = 100"),
     "members[0].pretension", ()),
    ("cable-pretension-compression", cable("length0 = 229.0", "pretension = -100"), "members[0].pretension", ()),
    ("tension-only-on-cable", cable("length0 = 229.0", "length0 = 229.0\ntension_only = true"),
     "members[0].tension_only", ()),
    ("up-on-cable", cable("length0 = 229.0", "length0 = 229.0\nup = [0, 0, 1]"), "members[0].up", ()),
    ("up-along-beam", beam("divide = 4", "divide = 4\nup = [1, 0, 0]"), "members[0].up", ()),
    ("pretension-on-beam", beam("divide = 4", "divide = 4\npretension = 5"), "members[0].pretension", ()),
    ("interior-count", cable("divide = 10 ", "divide = 2\ninterior = [[1, 0, 40], [2, 0, 40]] "),
     "members[0].interior", ()),
    ("members-not-an-array", "members = 5\n" + NO_MEMBERS, "members", ()),
    ("member-table-unknown-type", CABLE + '\n[[member_table]]\ntype = "chain"\nsection = "rope"\nids = ["Z"]\n'
     'i = ["West"]\nj = ["East"]\n', "member_table[0].type", ()),
    ("member-table-lengths", CABLE + '\n[[member_table]]\ntype = "bar"\nsection = "rope"\nids = ["Z", "Y"]\n'
     'i = ["West"]\nj = ["East", "West"]\n', "member_table[0].i", ()),
    ("member-table-duplicate-id", CABLE + '\n[[member_table]]\ntype = "bar"\nsection = "rope"\nids = ["C1"]\n'
     'i = ["West"]\nj = ["East"]\n', "member_table[0].ids[0]", ()),
    # --- supports -----------------------------------------------------------------------------------
    ("support-unknown-code", cable('West = "all"', 'West = "everything"'), "supports.West", ()),
    ("support-repeated-direction", cable('West = "all"', 'West = "x x y z"'), "supports.West", ()),
    ("support-not-a-string", cable('West = "all"', "West = 1"), "supports.West", ()),
    ("support-unknown-node", cable('West = "all"', 'West = "all"\nNorth = "all"'), "supports.North", ()),
    ("support-rotations-on-cable-node", cable('West = "all"', 'West = "x y z rx ry rz"'), "supports.West", ()),
    ("support-one-rotation-on-bar-node", beam('C = "pin"', 'C = "x y z rx"'), "supports.C", ()),
    # --- loads --------------------------------------------------------------------------------------
    ("loads-not-an-array", "loads = 5\n" + NO_MEMBERS + '[[members]]\nid = "M"\n'
     'type = "bar"\nnodes = ["A", "B"]\nsection = "rod"\n', "loads", ()),
    ("load-unknown-key", cable("self_weight = true", "self_weight = true\nscale = 2"), "loads[0].scale", ()),
    ("load-without-case", cable('case = "trolley"\n', ""), "loads[1].case", ()),
    ("load-of-two-kinds", cable('node = "C1.4"', 'node = "C1.4"\nmembers = ["C1"]'), "loads[1]", ()),
    ("self-weight-false", cable("self_weight = true", "self_weight = false"), "loads[0].self_weight", ()),
    ("self-weight-negative-factor", cable("self_weight = true", "self_weight = true\nfactor = -1.0"),
     "loads[0].factor", ()),
    ("self-weight-zero-factor", cable("self_weight = true", "self_weight = true\nfactor = 0"), "loads[0].factor", ()),
    ("self-weight-nan-factor", cable("self_weight = true", "self_weight = true\nfactor = nan"),
     "loads[0].factor", ()),
    ("load-unknown-node", cable('node = "C1.4"', 'node = "C1.40"'), "loads[1].node", ()),
    ("load-on-node-joined-to-no-member", LONE.replace('node = "C1.4"', 'node = "Lone"'), "loads[1].node", ()),
    ("load-on-supported-lone-node", LONE.replace('East = "all"', 'East = "all"\nLone = "all"')
     .replace('node = "C1.4"', 'node = "Lone"'), "loads[1].node", ()),
    ("force-two-components", cable("force = [0, 0, -18]", "force = [0, -18]"), "loads[1].force", ()),
    ("force-nan", cable("force = [0, 0, -18]", "force = [0, 0, nan]"), "loads[1].force[2]", ()),
    ("force-inf-text", cable("force = [0, 0, -18]", 'force = [0, 0, "-inf kN"]'), "loads[1].force[2]", ()),
    ("force-wrong-dimension", cable("force = [0, 0, -18]", 'force = [0, 0, "18 m"]'), "loads[1].force[2]", ()),
    ("force-table", cable("force = [0, 0, -18]", "force = { z = -18 }"), "loads[1].force", ()),
    ("moment-on-cable-node", cable("force = [0, 0, -18]", "moment = [0, 5, 0]"), "loads[1].moment", ()),
    ("moment-on-bar-end", beam('node = "B"\nforce = [0, 0, -5]', 'node = "C"\nmoment = [0, 5, 0]'),
     "loads[1].moment", ()),
    ("member-load-matches-nothing", cable('members = ["C1"]', 'members = ["C2"]'), "loads[2].members[0]", ()),
    ("member-pattern-matches-nothing", cable('members = ["C1"]', 'members = ["C1", "Q*"]'), "loads[2].members[1]", ()),
    ("member-load-empty-list", cable('members = ["C1"]', "members = []"), "loads[2].members", ()),
    ("temperature-absolute", cable("temperature = -30", 'temperature = "-30 degC"'), "loads[2].temperature", ()),
    ("temperature-without-alpha", cable("alpha = 1.2e-5\n", ""), "loads[2].temperature", ()),
    ("temperature-nan", cable("temperature = -30", "temperature = nan"), "loads[2].temperature", ()),
    ("per-length-count", cable("temperature = -30", "per_length = [0, -1]"), "loads[2].per_length", ()),
    ("path-not-joined", cable('node = "C1.4"\nforce = [0, 0, -18]', 'path = ["C1.2", "C1.4"]\nper_length = [0, 0, -1]'),
     "loads[1].path[1]", ()),
    ("path-one-node", cable('node = "C1.4"\nforce = [0, 0, -18]', 'path = ["C1.2"]\nper_length = [0, 0, -1]'),
     "loads[1].path", ()),
    ("path-start-negative", cable('node = "C1.4"\nforce = [0, 0, -18]',
                                  'path = ["C1.2", "C1.3"]\nper_length = [0, 0, -1]\nstart = -1'),
     "loads[1].start", ()),
    ("path-end-beyond", cable('node = "C1.4"\nforce = [0, 0, -18]',
                              'path = ["C1.2", "C1.3"]\nper_length = [0, 0, -1]\nend = 1000'),
     "loads[1].end", ()),
    ("movement-of-free-direction", cable('node = "C1.4"\nforce = [0, 0, -18]', 'node = "C1.4"\n'
                                         "displacement = [0, 0, -0.1]"), "loads[1].displacement[2]", ()),
    ("rotation-of-node-without-rotations", cable('node = "C1.4"\nforce = [0, 0, -18]', 'node = "West"\n'
                                                 "rotation = [0, 0.01, 0]"), "loads[1].rotation", ()),
    ("movement-of-lone-node", LONE.replace('East = "all"', 'East = "all"\nLone = "all"')
     .replace('node = "C1.4"\nforce = [0, 0, -18]', 'node = "Lone"\ndisplacement = [0, 0, -0.1]'),
     "loads[1].node", ()),
    # --- combinations -------------------------------------------------------------------------------
    ("combination-unknown-case", cable("trolley = 1.0 }", "trolly = 1.0 }"), "combinations[1].factors.trolly", ()),
    ("combination-duplicate-name", cable('name = "trolley"', 'name = "self-weight"'), "combinations[1].name", ()),
    ("combination-empty-factors", cable("factors = { self-weight = 1.0 }", "factors = {}"),
     "combinations[0].factors", ()),
    ("combination-nan-factor", cable("factors = { self-weight = 1.0 }", "factors = { self-weight = nan }"),
     "combinations[0].factors.self-weight", ()),
    ("combination-negative-self-weight", cable("factors = { self-weight = 1.0 }", "factors = { self-weight = -1.0 }"),
     "combinations[0].factors.self-weight", ()),
    ("combination-text-factor", cable("factors = { self-weight = 1.0 }", 'factors = { self-weight = "much" }'),
     "combinations[0].factors.self-weight", ()),
    # --- form-finding -------------------------------------------------------------------------------
    ("shape-unknown-method", CABLE + '\n[shape]\nmethod = "guess"\n', "shape.method", ()),
    ("shape-target-unknown-node", CABLE + '\n[shape]\npermanent = ["self-weight"]\n[shape.targets]\n'
     'Q = { z = 50 }\n[[shape.adjust]]\nmembers = "C1"\n', "shape.targets.Q", ()),
    ("shape-target-on-lone-node", LONE + '\n[shape]\npermanent = ["self-weight"]\n[shape.targets]\n'
     'Lone = { z = 50 }\n[[shape.adjust]]\nmembers = "C1"\n', "shape.targets.Lone", ()),
    ("shape-adjust-matches-nothing", CABLE + '\n[shape]\npermanent = ["self-weight"]\n[shape.targets]\n'
     '"C1.5" = { z = 50 }\n[[shape.adjust]]\nmembers = "H*"\n', "shape.adjust[0].members", ()),
    ("shape-permanent-unknown-case", CABLE + '\n[shape]\npermanent = ["dead"]\n[shape.targets]\n'
     '"C1.5" = { z = 50 }\n[[shape.adjust]]\nmembers = "C1"\n', "shape.permanent[0]", ()),
    ("shape-zero-force-density", CABLE + '\n[shape]\nmethod = "force-density"\npermanent = ["self-weight"]\n'
     'force_density = { "C*" = 0 }\n', 'shape.force_density."C*"', ()),
    ("shape-keys-of-other-method", CABLE + '\n[shape]\nmethod = "force-density"\npermanent = ["self-weight"]\n'
     'force_density = { "C*" = 5 }\n[shape.targets]\n"C1.5" = { z = 50 }\n', "shape.targets", ()),
    # --- analysis -----------------------------------------------------------------------------------
    ("analysis-unknown-solver", cable("increments = 5", 'increments = 5\nsolver = "fastest"'),
     "analysis.solver", ()),
    ("analysis-increments-zero", cable("increments = 5", "increments = 0"), "analysis.increments", ()),
    ("analysis-increments-float", cable("increments = 5", "increments = 5.0"), "analysis.increments", ()),
    ("analysis-tolerance-negative", cable("tolerance = 1e-9", "tolerance = -1e-9"), "analysis.tolerance", ()),
    ("analysis-tolerance-inf", cable("tolerance = 1e-9", "tolerance = inf"), "analysis.tolerance", ()),
    ("analysis-unknown-key", cable("increments = 5", "increments = 5\nsteps = 3"), "analysis.steps", ()),
    ("analysis-max-cuts-negative", cable("increments = 5", "increments = 5\nmax_cuts = -1"),
     "analysis.max_cuts", ()),
    # --- beam reference -----------------------------------------------------------------------------
    ("beam-reference-unknown-node", BEAM + "\n[beam_reference]\nQ = { position = [0, 0, 0] }\n",
     "beam_reference.Q", ()),
    ("beam-reference-bar-node", BEAM + "\n[beam_reference]\nC = { position = [5, 0, 3] }\n",
     "beam_reference.C", ()),
    ("beam-reference-nan", BEAM + "\n[beam_reference]\nB = { position = [5, 0, nan] }\n",
     "beam_reference.B.position[2]", ()),
    # --- command-line options that name things ------------------------------------------------------
    ("only-unknown-result", CABLE, "--only", ("--only", "trolley", "--only", "trolly")),
    ("only-unknown-load-case", BEAM.split("[[combinations]]")[0], "--only", ("--only", "wind")),
]


def _run(tmp_path, capsys, name, text, args=()):
    case = tmp_path / f"{name}.toml"
    case.write_bytes(text if isinstance(text, bytes) else text.encode())
    out = tmp_path / "out"
    code = main(["solve", str(case), "-o", str(out), *args])
    captured = capsys.readouterr()
    return case, out, code, captured.err


def test_corpus_is_big_and_names_are_unique():
    names = [entry[0] for entry in CORPUS]
    assert len(names) == len(set(names))
    assert len(CORPUS) >= 80


@pytest.mark.parametrize("name,text,key,args", CORPUS, ids=[entry[0] for entry in CORPUS])
def test_bad_input(tmp_path, capsys, name, text, key, args):
    case, out, code, err = _run(tmp_path, capsys, name, text, args)
    assert code == 2, err
    assert "Traceback" not in err
    lines = err.strip().splitlines()
    assert len(lines) == 1, err
    line = lines[0]
    assert line.startswith(f"cablefe: {case}: "), line
    if key:  # the key path follows the file name
        assert line.startswith(f"cablefe: {case}: {key}: "), line
    assert not out.exists()


@pytest.mark.parametrize("text", [CABLE, BEAM], ids=["cable", "beam"])
def test_bases_are_valid(tmp_path, capsys, text):
    case, out, code, err = _run(tmp_path, capsys, "base", text, ("--only", "trolley") if text is CABLE else ())
    assert code == 0, err
    assert (out / "results.json").exists()


def test_missing_pardiso_named_in_the_case(tmp_path, capsys, monkeypatch):
    """A machine without pypardiso (simulated): naming it is an input error."""
    import cablefe.solvers.linear as linear
    monkeypatch.setattr(linear, "available_backends", lambda: ["superlu", "splu-default"])
    text = cable("increments = 5", 'increments = 5\nsolver = "pardiso"')
    case, out, code, err = _run(tmp_path, capsys, "pardiso", text)
    assert code == 2 and err.startswith(f"cablefe: {case}: analysis.solver: ") and "pypardiso" in err
    assert len(err.strip().splitlines()) == 1 and not out.exists()


def test_missing_pardiso_named_on_the_command_line(tmp_path, capsys, monkeypatch):
    import cablefe.solvers.linear as linear
    monkeypatch.setattr(linear, "available_backends", lambda: ["superlu", "splu-default"])
    case, out, code, err = _run(tmp_path, capsys, "cli-pardiso", CABLE, ("--solver", "pardiso"))
    assert code == 2 and err.startswith(f"cablefe: {case}: --solver: ") and "pypardiso" in err
    assert len(err.strip().splitlines()) == 1 and not out.exists()


def test_run_with_unknown_only_writes_no_shape(tmp_path, capsys):
    """`run` shapes first; a mistyped --only must stop it before the shaped case is written."""
    case = CASES / "shaped_footbridge.toml"
    out = tmp_path / "out"
    assert main(["run", str(case), "-o", str(out), "--only", "no-such-result"]) == 2
    err = capsys.readouterr().err
    assert err.startswith(f"cablefe: {case}: --only: ") and len(err.strip().splitlines()) == 1
    assert not out.exists()


def test_check_rejects_the_same_input(tmp_path, capsys):
    """`check` reads through the same validation (a sample of the corpus)."""
    for name, text, key, args in CORPUS[::9]:
        if args:
            continue
        case = tmp_path / f"{name}.toml"
        case.write_bytes(text if isinstance(text, bytes) else text.encode())
        code = main(["check", str(case)])
        err = capsys.readouterr().err
        if name in ("nothing-to-solve",):  # checking a case with no loads is fine; solving it is not
            assert code == 0
            continue
        assert code == 2, (name, err)
        assert len(err.strip().splitlines()) == 1 and err.startswith(f"cablefe: {case}: ")


def test_python_api_names_unknown_results_and_empty_runs():
    """The library raises CaseError (not a bare ValueError) for the same mistakes."""
    import tomli

    from cablefe import build_model, solve
    from cablefe.errors import CaseError, UnknownResultError
    from cablefe.io.case import parse_case

    model = build_model(parse_case(tomli.loads(CABLE)))
    with pytest.raises(UnknownResultError) as info:
        solve(model, names=["trolly"])
    assert info.value.key == "names" and "trolly" in info.value.message
    bare = BEAM.split("[[loads]]")[0]
    with pytest.raises(CaseError) as info:
        solve(build_model(parse_case(tomli.loads(bare))))
    assert info.value.key == "loads"
