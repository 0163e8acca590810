"""The cutting table: fabrication precision (0.1 mm) and totals per cable and group."""
import csv
import io
from pathlib import Path

import numpy as np
import pytest
from numpy.testing import assert_allclose

import cablefe
from cablefe.io.case_writer import (cutting_csv_text, cutting_totals_csv_text, fabrication_decimals,
                                    write_shape_outputs)
from cablefe.solvers.formfind import CuttingTable, find_shape
from cablefe.spec import UnitSystem

CASES = Path(__file__).resolve().parent.parent / "cases"


def _rows(text):
    return list(csv.reader(io.StringIO(text)))


def _units(length):
    return UnitSystem(length=length, force="kN", length_scale={"m": 1.0, "mm": 1e-3, "cm": 1e-2}[length],
                      force_scale=1e3)


@pytest.mark.parametrize("length, digits", [("m", 4), ("mm", 1), ("cm", 2)])
def test_fabrication_decimals_reach_a_tenth_of_a_millimetre(length, digits):
    # 0.1 mm is 1e-4 m, 0.1 mm, 0.01 cm (4, 1, 2 decimals): the decimals that write it and no more
    assert fabrication_decimals(_units(length).length_scale) == digits


def test_cutting_lengths_round_to_a_tenth_of_a_millimetre_and_total_by_hand():
    # Hand check: H1 12.34567 m -> 12.3457, H2 8.00004 m -> 8.0000, MC1 (a
    # divided cable, one row) 40.123449 m -> 40.1234; group H = 12.3457 +
    # 8.0000 = 20.3457, all = 60.4691 (sums of the rounded rows, so the
    # totals add up to what the table shows).
    table = CuttingTable(member=("H1", "H2", "MC1"), unstressed_length=np.array([12.34567, 8.00004, 40.123449]),
                         tension=np.array([12345.678, 1000.0, 2.5e5]),
                         loaded_length=np.array([12.35, 8.0001, 40.2]))
    units = _units("m")
    rows = _rows(cutting_csv_text(table, units))
    assert rows[0] == ["member", "unstressed_length_m", "tension_kN", "loaded_length_m"]
    assert [r[:2] for r in rows[1:]] == [["H1", "12.3457"], ["H2", "8.0000"], ["MC1", "40.1234"]]
    assert [r[2] for r in rows[1:]] == ["12.3457", "1", "250"]           # kN, 6 significant digits
    assert [r[3] for r in rows[1:]] == ["12.3500", "8.0001", "40.2000"]
    totals = _rows(cutting_totals_csv_text(table, units, {"H1": "h", "H2": "h", "MC1": "main"}))
    assert totals[0] == ["kind", "name", "members", "total_unstressed_length_m", "total_loaded_length_m"]
    by = {(r[0], r[1]): r[2:] for r in totals[1:]}
    assert by["group", "H"] == ["2", "20.3457", "20.3501"]
    assert by["group", "MC"] == ["1", "40.1234", "40.2000"]
    assert by["section", "h"] == ["2", "20.3457", "20.3501"]
    assert by["all", ""] == ["3", "60.4691", "60.5501"]
    # in mm the same lengths carry one decimal: 12345.67 mm -> 12345.7
    mm = _rows(cutting_csv_text(table, _units("mm")))
    assert mm[1][1] == "12345.7" and mm[0][1] == "unstressed_length_mm"


def test_shaped_case_cutting_files_read_back_within_fabrication_precision(tmp_path):
    spec = cablefe.read_case(CASES / "shaped_footbridge.toml")
    found = find_shape(spec)
    case, table_path, totals_path = write_shape_outputs(tmp_path / "shaped.toml", found.spec, found.cutting)
    assert table_path.name == "shaped-cutting.csv" and totals_path.name == "shaped-cutting-totals.csv"
    rows = _rows(table_path.read_text())
    u = spec.units
    digits = fabrication_decimals(u.length_scale)
    L = np.array([float(r[1]) for r in rows[1:]]) * u.length_scale
    # one row per member, each within half a unit of the last decimal of the full-precision length
    assert [r[0] for r in rows[1:]] == [str(m) for m in found.cutting.member]
    assert_allclose(L, found.cutting.unstressed_length, rtol=0, atol=0.5 * 10.0 ** -digits * u.length_scale + 1e-12)
    assert all(len(r[1].split(".")[1]) == digits for r in rows[1:])
    totals = {(r[0], r[1]): r for r in _rows(totals_path.read_text())[1:]}
    everything = totals["all", ""]
    assert int(everything[2]) == len(rows) - 1
    # the total is the sum of the rounded rows, to the same precision
    assert_allclose(float(everything[3]), sum(float(r[1]) for r in rows[1:]), rtol=0, atol=0.5 * 10.0 ** -digits)
    back = cablefe.read_case(case)      # the shaped case still reads
    assert len(back.members) == len(spec.members)
