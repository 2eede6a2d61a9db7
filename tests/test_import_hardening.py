"""Import hardening: files that used to crash the reader, values that used to be stored
though not physical, catalog units that used to be ignored, and refusals that ran over
several lines. Every refusal is one line naming file, row and column, and the library
stays as it was, table for table.

Unit factors: NIST SP 811 (1 lb = 0.45359237 kg and 1 ft = 0.3048 m exactly, so
1 lb/ft3 = 16.01846 kg/m3; 1 g/cm3 = 1000 kg/m3 and 1 tonne = 1000 kg by the SI
definitions). Shore D has no exact relation to Shore A (ASTM D2240 gives none), so it is
refused, not converted.
"""

from __future__ import annotations

import re
import sqlite3
import warnings
from contextlib import closing

import numpy as np
import pytest

from engine.base.errors import CriteriaError, InputError
from engine.library import importer
from engine.library.importer import import_files, parse_sweeps, plan_import, read_table
from engine.library.store import Library
from engine.selection.criteria import Criteria

CATALOG = "id,name,mode\nG1,Grade one,tensile\n"
HEADER = "material,temperature [degC],frequency [Hz],storage_modulus [MPa],loss_factor\n"
GOOD_ROWS = "G1,20,1,5.0,0.1\nG1,20,10,6.0,0.12\nG1,30,1,4.5,0.09\nG1,30,10,5.4,0.11\n"


def write(tmp_path, name, data):
    path = tmp_path / name
    path.write_bytes(data if isinstance(data, bytes) else data.encode("utf-8"))
    return path


def xlsx(tmp_path, name, rows):
    openpyxl = pytest.importorskip("openpyxl")
    wb = openpyxl.Workbook()
    for row in rows:
        wb.active.append(row)
    path = tmp_path / name
    wb.save(path)
    return path


def dump(lib) -> list[str]:
    """Every table of the library file, row for row."""
    with closing(sqlite3.connect(lib.location)) as c:
        return list(c.iterdump())


@pytest.fixture
def lib(tmp_path):
    return Library(str(tmp_path / "lib.sqlite"))


def refused(lib, catalogs=(), sweeps=(), match=""):
    """Import, expect a refusal matching ``match``; the message is one line and the
    library is unchanged table for table. Returns the message."""
    before = dump(lib)
    with warnings.catch_warnings():
        warnings.simplefilter("error")  # a warning would have reached the user's terminal
        with pytest.raises(InputError, match=match) as caught:
            import_files(lib, list(catalogs), list(sweeps))
    message = str(caught.value)
    assert len(message.splitlines()) == 1, message
    assert dump(lib) == before
    return message


def accepted(lib, catalogs=(), sweeps=()):
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        return import_files(lib, list(catalogs), list(sweeps))


# -- tracebacks that became reasons ------------------------------------------------------


def test_header_cell_over_the_csv_field_limit(tmp_path, lib):
    # Python's csv module refuses fields over 131,072 characters with csv.Error.
    cat = write(tmp_path, "cat.csv", "id,name,mode," + "x" * 140_000 + "\nG1,A,tensile,1\n")
    msg = refused(lib, [cat], match=r"cat\.csv, row 1: a header cell over 10,000 characters")
    assert "the limit is 10,000 per cell" in msg


def test_header_and_data_cells_over_the_cell_limit(tmp_path, lib):
    long = "y" * (importer.MAX_CELL_CHARS + 1)
    cat = write(tmp_path, "cat.csv", f"id,name,mode,{long}\nG1,A,tensile,1\n")
    refused(lib, [cat], match=r"row 1: header cell 4 has 10,001 characters; the limit is 10,000")
    cat = write(tmp_path, "cat2.csv", f"id,name,mode,notes\nG1,A,tensile,{long}\n")
    refused(lib, [cat], match=r"row 2, column 'notes': a cell of 10,001 characters; the limit")


def test_bare_cr_line_ends_are_read(tmp_path, lib):
    cat = write(tmp_path, "cat.csv", CATALOG.replace("\n", "\r"))
    sw = write(tmp_path, "sw.csv", (HEADER + GOOD_ROWS).replace("\n", "\r"))
    accepted(lib, [cat], [sw])
    _, pts = lib.latest_points("G1")
    assert pts.shape == (4, 4)
    assert pts[:, 2].tolist() == pytest.approx([5e6, 6e6, 4.5e6, 5.4e6])  # SI prefix M


def test_xlsx_numeric_header_cell(tmp_path, lib):
    cat = xlsx(tmp_path, "cat.xlsx", [["id", "name", "mode", 12.5], ["G1", "A", "tensile", 7]])
    accepted(lib, [cat])
    assert lib.material("G1").extra == {"12.5": "7"}


def test_file_size_and_row_limits(tmp_path, lib, monkeypatch):
    sw = write(tmp_path, "sw.csv", HEADER + GOOD_ROWS)
    cat = write(tmp_path, "cat.csv", CATALOG)
    monkeypatch.setattr(importer, "MAX_FILE_BYTES", 100)
    refused(lib, [cat], [sw], match=r"sw\.csv: the file is 0 MB; the limit is 0 MB per file")
    with pytest.raises(InputError, match=r"up\.csv: the file is .* the limit is"):
        read_table((HEADER + GOOD_ROWS).encode(), "up.csv")
    monkeypatch.setattr(importer, "MAX_FILE_BYTES", 200_000_000)
    monkeypatch.setattr(importer, "MAX_ROWS", 3)
    refused(lib, [cat], [sw], match=r"sw\.csv: more than 3 data rows; the limit is 3 points")
    assert importer.MAX_ROWS == 3 and importer.MAX_CELL_CHARS == 10_000


def test_default_limits_are_the_documented_ones():
    assert importer.MAX_FILE_BYTES == 200_000_000  # said as "200 MB" in the refusal
    assert importer.MAX_ROWS == 5_000_000
    assert importer.MAX_CELL_CHARS == 10_000


def test_nul_byte_after_the_start_is_refused_with_its_row(tmp_path, lib):
    text = HEADER + GOOD_ROWS * 300 + "G1,40,1,5\x00,0.1\n"
    refused(
        lib,
        [write(tmp_path, "cat.csv", CATALOG)],
        [write(tmp_path, "sw.csv", text)],
        match=r"sw\.csv, row 1202: a NUL character in the file",
    )


def test_non_utf8_criteria_file_gives_one_line(tmp_path):
    path = write(tmp_path, "crit.json", b'{"indices": ["caf\xe9"]}')
    with pytest.raises(CriteriaError, match=r"crit\.json: not UTF-8 text \(byte 18") as caught:
        Criteria.load(path)
    assert len(str(caught.value).splitlines()) == 1


# -- values after conversion -------------------------------------------------------------


def test_overflow_after_unit_conversion_is_refused(tmp_path, lib):
    cat = write(tmp_path, "cat.csv", CATALOG)
    text = HEADER.replace("[MPa]", "[GPa]") + GOOD_ROWS.replace("5.0,0.1", "1e305,0.1")
    msg = refused(
        lib,
        [cat],
        [write(tmp_path, "sw.csv", text)],
        match=r"sw\.csv, row 2, column 'storage_modulus \[GPa\]': 1e305 \(inf Pa once converted\)",
    )
    assert "is outside 0.001 to 1e+12 Pa" in msg


def test_derived_loss_factor_must_be_finite(tmp_path, lib):
    text = (
        "material,temperature [degC],frequency [Hz],storage_modulus [Pa],loss_modulus [GPa]\n"
        "G1,20,1,0.01,900\nG1,20,10,1e6,1e-4\n"
    )
    refused(
        lib,
        [write(tmp_path, "cat.csv", CATALOG)],
        [write(tmp_path, "sw.csv", text)],
        match=r"row 2, column 'loss_modulus \[GPa\]': loss modulus / storage modulus = 9e\+13",
    )


@pytest.mark.parametrize(
    ("cell", "column", "match"),
    [
        ("1e-320", "storage_modulus [MPa]", r"1e-320 \(1e-314 Pa once converted\) is outside"),
        ("1e-30", "frequency [Hz]", r"1e-30 is outside 1e-09 to 1e\+09 Hz"),
        ("1e6", "temperature [degC]", r"1e6 is outside -273.15 to 4000 degC"),
        ("1e9", "loss_factor", r"1e9 is outside 0 to 10000"),
    ],
)
def test_values_outside_physical_ranges(tmp_path, lib, cell, column, match):
    position = HEADER.strip().split(",").index(column)
    cells = GOOD_ROWS.splitlines()[0].split(",")
    cells[position] = cell
    text = HEADER + ",".join(cells) + "\n" + "\n".join(GOOD_ROWS.splitlines()[1:]) + "\n"
    refused(
        lib,
        [write(tmp_path, "cat.csv", CATALOG)],
        [write(tmp_path, "sw.csv", text)],
        match=rf"row 2, column '{re.escape(column)}': {match}",
    )


# -- catalog units -----------------------------------------------------------------------


@pytest.mark.parametrize(
    ("header", "cell", "field", "stored"),
    [
        ("density [g/cm3]", "1.15", "density", 1150.0),  # 1 g/cm3 = 1000 kg/m3 (SI)
        ("density [kg/m3]", "1150", "density", 1150.0),
        ("density [lb/ft3]", "62.42796", "density", 1000.0),  # NIST SP 811
        ("price [per tonne]", "3000", "price", 3.0),  # 1 tonne = 1000 kg (SI)
        ("price [EUR/kg]", "4.5", "price", 4.5),
        ("price [per lb]", "1", "price", 1 / 0.45359237),  # NIST SP 811: exact pound
        ("hardness [Shore A]", "60", "hardness", 60.0),
    ],
)
def test_catalog_units_are_converted(tmp_path, lib, header, cell, field, stored):
    cat = write(tmp_path, "cat.csv", f"id,name,mode,{header}\nG1,A,tensile,{cell}\n")
    accepted(lib, [cat])
    assert getattr(lib.material("G1"), field) == pytest.approx(stored, rel=1e-6)


@pytest.mark.parametrize(
    ("header", "cell", "match"),
    [
        ("hardness [Shore D]", "50", r"column 'hardness \[Shore D\]': hardness scale 'Shore D'"),
        ("density [oz/in3]", "1", r"unknown unit 'oz/in3'; accepted: kg/m3, g/cm3, lb/ft3"),
        ("price [per m]", "1", r"unknown price basis 'per m'; accepted: per kg, per tonne"),
        ("poisson_ratio [%]", "45", r"unit '%' for 'poisson_ratio', which has none"),
        # 1.15 read as kg/m3 (no unit given) is no solid's density: the unit is asked for.
        ("density", "1.15", r"row 2, column 'density': 1.15 is outside 5 to 25000 kg/m3"),
        ("density [g/cm3]", "1e306", r"1e306 is beyond the range of numbers once converted"),
    ],
)
def test_catalog_units_refused_with_the_unit_named(tmp_path, lib, header, cell, match):
    cat = write(tmp_path, "cat.csv", f"id,name,mode,{header}\nG1,A,tensile,{cell}\n")
    refused(lib, [cat], match=match)


# -- duplicated columns, text cells, repeated points -------------------------------------


def test_duplicated_column_refused_in_xlsx_and_csv(tmp_path, lib):
    head = ["material", "temperature [degC]", "frequency [Hz]", "storage_modulus [MPa]"]
    sw = xlsx(
        tmp_path,
        "sw.xlsx",
        [
            [*head, "loss_factor", "loss_factor"],
            ["G1", 20, 1, 5, 0.1, 0.3],
            ["G1", 20, 10, 6, 0.1, 0.3],
        ],
    )
    cat = write(tmp_path, "cat.csv", CATALOG)
    refused(lib, [cat], [sw], match=r"sw\.xlsx, column 'loss_factor': column 'loss_factor' appears")
    text = "id,name,mode,density [kg/m3],density [g/cm3]\nG1,A,tensile,1100,1.1\n"
    refused(
        lib,
        [write(tmp_path, "c.csv", text)],
        match=r"column 'density' appears twice \(as 'density \[kg/m3\]' and 'density \[g/cm3\]'\)",
    )


def test_semicolon_file_keeps_commas_in_text(tmp_path, lib):
    text = 'id;name;mode;density [kg/m3];notes\nG1;Name, with comma;tensile;1100,5;"soft, black"\n'
    accepted(lib, [write(tmp_path, "cat.csv", text)])
    m = lib.material("G1")
    assert (m.name, m.notes, m.density) == ("Name, with comma", "soft, black", 1100.5)


def test_conflicting_repeated_points_are_refused_naming_both_rows(tmp_path, lib):
    text = HEADER + GOOD_ROWS + "G1,20,1,15.0,0.1\n"  # row 6 repeats row 2, 3x stiffer
    msg = refused(
        lib,
        [write(tmp_path, "cat.csv", CATALOG)],
        [write(tmp_path, "sw.csv", text)],
        match=r"sw\.csv, row 6, column 'storage_modulus \[MPa\]': rows 2 and 6 give grade 'G1'",
    )
    assert "at 20 degC and 1 Hz (storage modulus 5 and 15 MPa" in msg


def test_near_repeated_points_are_averaged_with_a_note(tmp_path, lib):
    # Rows 2 and 6 (and 7, in kelvin the same 20 degC) agree within 10 %: one mean point.
    text = HEADER + GOOD_ROWS + "G1,20,1,5.4,0.104\nG1,20,1,5.0,0.1\n"
    table = read_table(write(tmp_path, "sw.csv", text))
    sweep = parse_sweeps(table, {"G1"})
    pts = sweep.by_material["G1"]
    assert pts.shape == (4, 4)
    first = pts[(pts[:, 0] == 20) & (pts[:, 1] == 1)][0]
    storage = np.mean([5.0, 5.4, 5.0]) * 1e6
    loss = np.mean([5.0 * 0.1, 5.4 * 0.104, 5.0 * 0.1]) * 1e6
    assert first[2] == pytest.approx(storage) and first[3] == pytest.approx(loss / storage)
    assert sweep.notes == [
        f"{table.file}: 2 repeated point(s) (same grade, temperature and frequency, "
        "agreeing within 10%) averaged into 1, first at row 2"
    ]
    plan = plan_import(lib, [read_table(write(tmp_path, "cat.csv", CATALOG))], [table])
    assert plan.notes == sweep.notes
    # ... and the import's summary (what `load` prints and its JSON holds) says it too
    summary = import_files(
        lib, [write(tmp_path, "cat.csv", CATALOG)], [write(tmp_path, "sw.csv", text)]
    )
    assert [n.split(": ", 1)[1] for n in summary.notes] == [
        n.split(": ", 1)[1] for n in sweep.notes
    ]
    assert summary.to_dict()["notes"] == summary.notes


# -- one line, always --------------------------------------------------------------------


def test_quoted_id_with_a_line_break(tmp_path, lib):
    cat = write(tmp_path, "cat.csv", 'id,name,mode\n"G\n1",A,tensile\n')
    refused(lib, [cat], match=r"row 2, column 'id': grade id 'G\\n1' holds a line break")
    cat = write(tmp_path, "cat2.csv", 'id,name,mode\n"G\n1",A,bending\n')
    refused(lib, [cat], match=r"grade id 'G\\n1' holds a line break")


def test_unbalanced_quote_is_named_plainly(tmp_path, lib):
    cat = write(tmp_path, "cat.csv", 'id,name,mode\nG1,"A,tensile\nG2,B,tensile\nG3,C,shear\n')
    refused(lib, [cat], match=r"cat\.csv, row 2: a quote mark \(\"\) opens a cell that is never")


def test_quote_that_swallows_rows_then_closes(tmp_path, lib):
    text = 'id,name,mode,notes\nG1,A,tensile,"soft\nG2,B,tensile,x\nG3,C,shear,"\nG4,D,shear,\n'
    refused(
        lib,
        [write(tmp_path, "cat.csv", text)],
        match=r"row 2, column 'notes': a quoted cell runs over 3 lines, 2 of them like rows",
    )
    # A note of two lines without delimiters is text, and kept as written.
    text = 'id,name,mode,notes\nG1,A,tensile,"soft\nblack"\n'
    accepted(lib, [write(tmp_path, "ok.csv", text)])
    assert lib.material("G1").notes == "soft\nblack"


def test_file_and_column_names_with_line_breaks_are_escaped(tmp_path):
    with pytest.raises(InputError) as caught:
        read_table(b'id,"na\nme",mode\n', "up\nload.csv")
    assert len(str(caught.value).splitlines()) == 1
    assert str(caught.value).startswith("up\\nload.csv")


def test_blank_header_over_values_is_refused_and_blank_columns_dropped(tmp_path, lib):
    refused(
        lib,
        [write(tmp_path, "cat.csv", "id,name,,mode\nG1,A,x,tensile\n")],
        match=r"cat\.csv, row 2: a value under a blank header \(column 3\)",
    )
    accepted(lib, [write(tmp_path, "ok.csv", "id,name,mode,,\nG1,A,tensile,,\n")])
    assert lib.material("G1").extra == {}
