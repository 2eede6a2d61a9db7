"""Import format: every bad-input case gets one line naming file, row and column, and the
library stays as it was. Unit factors: NIST SP 811 (psi) and the SI definitions."""

import numpy as np
import pytest

from engine.base.errors import InputError
from engine.base.units import PSI_IN_PA
from engine.library.importer import import_files, read_table

CATALOG = "id,name,mode,supplier,density [kg/m3]\nG1,Grade one,tensile,Acme-free,1100\n"
HEADER = "material,temperature [degC],frequency [Hz],storage_modulus [MPa],loss_factor\n"
GOOD_ROWS = "G1,20,1,5.0,0.1\nG1,20,10,6.0,0.12\nG1,30,1,4.5,0.09\nG1,30,10,5.4,0.11\n"


def write(tmp_path, name, text, mode="w"):
    path = tmp_path / name
    if isinstance(text, bytes):
        path.write_bytes(text)
    else:
        path.write_text(text, encoding="utf-8")
    return path


def snapshot(lib):
    return (
        [m.as_row() for m in lib.materials(include_deleted=True)],
        [(d.material_id, d.data_hash) for d in lib.datasets()],
        len(lib.imports()),
        lib.version(),
    )


def test_good_import_converts_to_si(tmp_path, any_library):
    cat = write(tmp_path, "cat.csv", CATALOG)
    sw = write(tmp_path, "sw.csv", HEADER + GOOD_ROWS)
    summary = import_files(any_library, [cat], [sw])
    assert summary.materials_added == ["G1"]
    _, pts = any_library.latest_points("G1")
    assert pts.shape == (4, 4)
    assert pts[0, 2] == pytest.approx(5.0e6)  # MPa -> Pa (SI prefix)


def test_units_kelvin_rad_per_s_psi_and_loss_modulus(tmp_path, any_library):
    cat = write(tmp_path, "cat.csv", CATALOG)
    text = (
        "material,temperature [K],frequency [rad/s],storage_modulus [psi],loss_modulus [psi]\n"
        "G1,293.15,6.283185307179586,1000,100\nG1,303.15,62.83185307179586,1000,50\n"
    )
    sw = write(tmp_path, "sw.csv", text)
    import_files(any_library, [cat], [sw])
    _, pts = any_library.latest_points("G1")
    assert pts[0, 0] == pytest.approx(20.0)
    assert pts[0, 1] == pytest.approx(1.0)
    assert pts[0, 2] == pytest.approx(1000 * PSI_IN_PA)
    assert PSI_IN_PA == pytest.approx(6894.757, rel=1e-6)  # NIST SP 811: 1 psi = 6.894757 kPa
    assert pts[0, 3] == pytest.approx(0.1)


def test_semicolon_decimal_comma_bom_and_degf(tmp_path, any_library):
    cat = write(tmp_path, "cat.csv", CATALOG)
    text = (
        "\ufeffmaterial;temperature [degF];frequency [Hz];storage_modulus [kPa];loss_factor\n"
        "G1;68;1;5000,5;0,1\nG1;86;1;4000;0,2\n"
    )
    sw = write(tmp_path, "sw.csv", text)
    import_files(any_library, [cat], [sw])
    _, pts = any_library.latest_points("G1")
    assert pts[0, 0] == pytest.approx(20.0)  # 68 degF = 20 degC
    assert pts[0, 2] == pytest.approx(5000.5e3)
    assert pts[0, 3] == pytest.approx(0.1)


def test_xlsx_with_the_same_columns(tmp_path, any_library):
    openpyxl = pytest.importorskip("openpyxl")
    wb = openpyxl.Workbook()
    ws = wb.active
    for line in (HEADER + GOOD_ROWS).strip().splitlines():
        cells = line.split(",")
        ws.append([cells[0], *[float(c) for c in cells[1:]]] if cells[0] == "G1" else cells)
    path = tmp_path / "sw.xlsx"
    wb.save(path)
    cat = write(tmp_path, "cat.csv", CATALOG)
    import_files(any_library, [cat], [path])
    _, pts = any_library.latest_points("G1")
    assert pts.shape == (4, 4)


def test_same_files_twice_change_nothing(tmp_path, any_library):
    cat = write(tmp_path, "cat.csv", CATALOG)
    sw = write(tmp_path, "sw.csv", HEADER + GOOD_ROWS)
    import_files(any_library, [cat], [sw])
    before = snapshot(any_library)
    summary = import_files(any_library, [cat], [sw])
    assert snapshot(any_library) == before
    assert len(summary.files_skipped) == 2


def test_new_data_adds_a_data_set_and_keeps_the_old(tmp_path, any_library):
    cat = write(tmp_path, "cat.csv", CATALOG)
    import_files(any_library, [cat], [write(tmp_path, "a.csv", HEADER + GOOD_ROWS)])
    newer = GOOD_ROWS.replace("5.0,0.1", "5.2,0.1")
    import_files(any_library, [], [write(tmp_path, "b.csv", HEADER + newer)])
    sets = any_library.datasets("G1")
    assert [d.file_name for d in sets] == ["a.csv", "b.csv"]
    newest, pts = any_library.latest_points("G1")
    assert newest.file_name == "b.csv" and pts[0, 2] == pytest.approx(5.2e6)


def test_catalog_update_keeps_history(tmp_path, any_library):
    import_files(any_library, [write(tmp_path, "a.csv", CATALOG)])
    import_files(any_library, [write(tmp_path, "b.csv", CATALOG.replace("1100", "1150"))])
    assert any_library.material("G1").density == 1150
    assert "1100" in any_library.history("G1")[0]["previous"]


BAD_SWEEPS = [
    (
        "missing column",
        HEADER.replace(",frequency [Hz]", "") + "G1,20,5,0.1\n",
        r"sw\.csv: missing required column 'frequency'",
    ),
    (
        "no loss column",
        "material,temperature [degC],frequency [Hz],storage_modulus [MPa]\nG1,20,1,5\n",
        r"one of 'loss_factor' or 'loss_modulus",
    ),
    (
        "unknown unit",
        HEADER.replace("[MPa]", "[bar]") + GOOD_ROWS,
        r"column 'storage_modulus \[bar\]': unknown unit 'bar'; accepted: Pa, kPa, MPa",
    ),
    (
        "no unit",
        HEADER.replace(" [Hz]", "") + GOOD_ROWS,
        r"column 'frequency': column 'frequency' needs its unit in brackets",
    ),
    (
        "non-numeric",
        HEADER + "G1,20,1,abc,0.1\n",
        r"row 2, column 'storage_modulus \[MPa\]': "
        r"'abc' is not a number",
    ),
    (
        "blank cell",
        HEADER + GOOD_ROWS + "G1,40,1,,0.1\n",
        r"row 6, column 'storage_modulus \[MPa\]': blank cell",
    ),
    (
        "zero modulus",
        HEADER + "G1,20,1,0,0.1\n",
        r"row 2, column 'storage_modulus \[MPa\]': "
        r"0 is not positive; moduli must be positive",
    ),
    (
        "negative modulus",
        HEADER + GOOD_ROWS + "G1,20,3,-3.2,0.1\n",
        r"row 6, column 'storage_modulus \[MPa\]': -3.2 is not positive",
    ),
    (
        "zero frequency",
        HEADER + "G1,20,0,5,0.1\n",
        r"row 2, column 'frequency \[Hz\]': 0 is not positive; frequencies must be positive",
    ),
    (
        "negative loss factor",
        HEADER + "G1,20,1,5,-0.1\n",
        r"row 2, column 'loss_factor': -0.1 is negative; loss factors must be >= 0",
    ),
    (
        "below absolute zero",
        HEADER.replace("[degC]", "[K]") + "G1,-5,1,5,0.1\n",
        r"row 2, column 'temperature \[K\]': -5 K is below absolute zero",
    ),
    (
        "unknown grade",
        HEADER + "G9,20,1,5,0.1\n",
        r"row 2, column 'material': unknown grade id 'G9'",
    ),
    ("blank grade", HEADER + ",20,1,5,0.1\n", r"row 2, column 'material': blank cell"),
    ("empty", "", r"sw\.csv: the file is empty"),
    ("header only", HEADER, r"sw\.csv: the file has a header but no data rows"),
    ("binary", b"\x89PNG\r\n\x1a\n\x00\x00\x00\rIHDR", r"sw\.csv: this is a binary file"),
    ("too many cells", HEADER + "G1,20,1,5,0.1,7\n", r"row 2: 6 cells but the header has 5"),
    (
        "duplicate column",
        HEADER.strip() + ",loss_factor\nG1,20,1,5,0.1,0.1\n",
        r"column 'loss_factor' appears twice",
    ),
]


@pytest.mark.parametrize("case,text,message", BAD_SWEEPS, ids=[c[0] for c in BAD_SWEEPS])
def test_bad_sweep_is_refused_and_library_unchanged(tmp_path, any_library, case, text, message):
    import_files(any_library, [write(tmp_path, "first.csv", CATALOG)])
    before = snapshot(any_library)
    cat2 = write(tmp_path, "cat2.csv", CATALOG.replace("G1,", "G2,").replace("Grade one", "Two"))
    sw = write(tmp_path, "sw.csv", text)
    with pytest.raises(InputError, match=message):
        import_files(any_library, [cat2], [sw])
    assert snapshot(any_library) == before  # G2 of the good catalog was not written either


BAD_CATALOGS = [
    ("missing id column", "name,mode\nA,tensile\n", r"missing required column 'id'"),
    ("blank name", "id,name,mode\nG1,,tensile\n", r"row 2, column 'name': blank cell"),
    (
        "duplicate id",
        "id,name,mode\nG1,A,tensile\nG1,B,shear\n",
        r"row 3, column 'id': duplicate id 'G1'",
    ),
    (
        "bad mode",
        "id,name,mode\nG1,A,bending\n",
        r"row 2, column 'mode': mode 'bending' is not one of tensile, shear",
    ),
    (
        "bad density",
        "id,name,mode,density [kg/m3]\nG1,A,tensile,heavy\n",
        r"row 2, column 'density \[kg/m3\]': 'heavy' is not a number",
    ),
    (
        "negative density",
        "id,name,mode,density [kg/m3]\nG1,A,tensile,-5\n",
        r"density must be positive",
    ),
    (
        "hardness out of scale",
        "id,name,mode,hardness [Shore A]\nG1,A,tensile,130\n",
        r"Shore A hardness lies between 0 and 100",
    ),
    (
        "inverted service range",
        "id,name,mode,service_min [degC],service_max [degC]\nG1,A,tensile,80,-20\n",
        r"row 2, column 'service_min \[degC\]': service_min is not below",
    ),
]


@pytest.mark.parametrize("case,text,message", BAD_CATALOGS, ids=[c[0] for c in BAD_CATALOGS])
def test_bad_catalog_is_refused(tmp_path, any_library, case, text, message):
    before = snapshot(any_library)
    with pytest.raises(InputError, match=message):
        import_files(any_library, [write(tmp_path, "cat.csv", text)])
    assert snapshot(any_library) == before


def test_missing_file(tmp_path):
    with pytest.raises(InputError, match=r"nowhere\.csv: file not found"):
        read_table(tmp_path / "nowhere.csv")


def test_blank_optional_cell_means_unknown_and_extra_columns_kept(tmp_path, any_library):
    text = "id,name,mode,price [per kg],colour\nG1,A,shear,,black\n"
    import_files(any_library, [write(tmp_path, "cat.csv", text)])
    m = any_library.material("G1")
    assert m.price is None and m.extra == {"colour": "black"} and m.mode == "shear"


def test_large_import_is_vectorised(tmp_path, any_library):
    # 20 000 points parse and validate in one pass; the last bad row is still named.
    n = 20_000
    t = np.repeat(np.arange(n // 10), 10)
    lines = [HEADER.strip()] + [
        f"G1,{a},{b + 1},5,0.1" for a, b in zip(t, np.tile(range(10), n // 10), strict=False)
    ]
    lines[-1] = "G1,1,1,5,x"
    with pytest.raises(InputError, match=rf"row {n + 1}, column 'loss_factor'"):
        import_files(
            any_library,
            [write(tmp_path, "c.csv", CATALOG)],
            [write(tmp_path, "s.csv", "\n".join(lines))],
        )


def test_single_point_data_set_is_refused(tmp_path, any_library):
    # A data set of one point cannot be fitted; refusing it keeps the richer one in use.
    import_files(any_library, [write(tmp_path, "cat.csv", CATALOG)])
    before = snapshot(any_library)
    sw = write(tmp_path, "one.csv", HEADER + "G1,20,1,5,0.1\n")
    with pytest.raises(InputError, match=r"one\.csv, row 2, column 'material': grade 'G1' has a"):
        import_files(any_library, [], [sw])
    assert snapshot(any_library) == before
