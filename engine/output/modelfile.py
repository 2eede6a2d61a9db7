"""The fitted model of one grade as a file: Prony terms and shift law for other programs.

``python -m engine fit ID --out model.json`` (or ``.csv``) writes what a finite-element or
system model needs to carry a grade's viscoelastic behaviour: the generalized Maxwell
(Prony) series at the reference temperature and the time-temperature shift law with its
constants and validity range. The layout is this project's own, named
``quietgrade-model``, version 1 (:data:`FORMAT_NAME`, :data:`FORMAT_VERSION`).

Record
------
The file holds one record of sections; each section maps keys to a number, a text, a
yes/no flag, a list of numbers or flags, or nothing (``null``; a blank cell in CSV). The
unit of every number is the suffix of its key: ``_C`` degC, ``_K`` kelvin (a temperature
difference), ``_Pa`` Pa, ``_s`` s, ``_Hz`` Hz, ``_kJ_per_mol`` kJ/mol; a key without such
a suffix is a pure number.

``format``
    ``name`` ("quietgrade-model"), ``version`` (1), ``engine_version``.
``grade``
    ``id``; ``mode`` ("tensile" or "shear"); ``modulus_symbol``: "E" for tensile data,
    "G" for shear data. Every modulus in the file is of that kind.
``units``
    The units above in words, for a reader who opens the file cold.
``curve``
    ``reference_C``: reference temperature of the master curve; ``vertical_shift``: when
    yes, a modulus at temperature T is the series value times T/T_ref (kelvin);
    ``reduced_frequency_low_Hz`` and ``reduced_frequency_high_Hz``: the reduced
    frequencies the measured data cover (outside them the series extrapolates).
``prony``
    ``equilibrium_modulus_Pa`` (E_inf), ``glassy_modulus_Pa`` (E_0 = E_inf + sum E_i),
    ``equilibrium_fraction`` (g_inf = E_inf / E_0), ``terms`` (N), and three lists of N
    entries, ordered by relaxation time: ``tau_s`` (tau_i), ``modulus_Pa`` (E_i) and
    ``g`` (g_i = E_i / E_0, the normalised form many finite-element programs take; the
    g_i sum to 1 - g_inf). Terms whose fitted E_i is zero are left out.
``shift_law``
    ``kind``: "WLF", "Arrhenius", "WLF+Arrhenius" or "none" (a single isotherm);
    ``wlf_c1``, ``wlf_c2_K`` at ``wlf_reference_C`` (where the law was fitted);
    ``curve_wlf_c1``, ``curve_wlf_c2_K``: the same WLF law referred to the master
    curve's ``reference_C`` (C2' = C2 + T_ref - T_w, C1' = C1 C2 / C2'; blank when
    T_ref lies at or below the WLF divergence T_w - C2); ``activation_kJ_per_mol`` and
    ``arrhenius_anchor_C`` (the temperature the Arrhenius branch starts from: the
    split for "WLF+Arrhenius", the reference for "Arrhenius"); ``split_C``: WLF at and
    above it, Arrhenius below; ``valid_from_C``, ``valid_to_C``: the measured
    temperatures the law was fitted over (its validity range); ``rms``: rms residual
    of the law fit [decades of aT].
``shift_factors``
    ``count`` and one list entry per measured isotherm: ``temperature_C``, ``log_aT``
    (log10 aT from the data), ``bridged`` (yes where the overlap did not determine it
    and the law supplied it), and ``log_aT_low``, ``log_aT_high`` (95 % interval; blank
    when the engine gave none).
``about``
    ``caution``: the caution every exported file carries.

Using the model
---------------
Angular frequency omega = 2 pi f_R, with the reduced frequency f_R = f aT(T)::

    E'(omega)  = E_inf + sum_i E_i (omega tau_i)^2 / (1 + (omega tau_i)^2)
    E''(omega) = sum_i E_i omega tau_i / (1 + (omega tau_i)^2)
    E(t)       = E_inf + sum_i E_i exp(-t / tau_i)      (t reduced: t / aT)

The shift law, with temperatures in kelvin inside the Arrhenius term and
raw(T) = -C1 (T - T_w) / (C2 + T - T_w) for "WLF", raw(T) = Ea / (R ln 10) (1/T - 1/T_a)
for "Arrhenius", and for "WLF+Arrhenius" the WLF form at and above T_split and
WLF(T_split) + the Arrhenius form anchored at T_split below it, is
log10 aT(T) = raw(T) - raw(T_ref): zero at the reference. For "WLF" this equals
-C1' (T - T_ref) / (C2' + T - T_ref) with the ``curve_wlf_*`` constants. Inside the
measured temperatures the engine itself adds the measured-minus-law difference of
``log_aT``, interpolated linearly between isotherms and held at the end values beyond
them; the law alone is what a model outside this program should use.

CSV layout
----------
One long table, UTF-8 with a byte-order mark, header row
``section,key,index,value,text,unit`` and one row per value: ``index`` is blank for a
single value and counts 1..N along a list; a number sits in ``value``, a text or a yes/no
flag in ``text`` (quoted); ``unit`` repeats the key's unit (blank for pure numbers and
text). A value of nothing leaves both ``value`` and ``text`` blank. Numbers are written
with enough digits to read back exactly. ``pandas.read_csv(path)`` gives a float
``value`` column and a text ``text`` column; a spreadsheet shows the table as it is.
Text cells that begin with ``=``, ``+``, ``-``, ``@``, a tab or a carriage return get a
leading ``'`` so that no spreadsheet runs them as a formula (common practice);
:func:`read_model` takes it off again.

References
----------
Williams, M. L., Landel, R. F., Ferry, J. D. (1955). J. Am. Chem. Soc. 77, 3701-3707.
Ferry, J. D. (1980). Viscoelastic Properties of Polymers, 3rd ed. Wiley, ch. 11.
"""

from __future__ import annotations

import csv
import io
import json
from pathlib import Path

import numpy as np

from engine.base.caution import CAUTION
from engine.base.errors import FitError, InputError
from engine.base.version import __version__
from engine.curves.mastercurve import MasterCurve
from engine.output.rows import FORMULA_START, csv_cell, finite, yes_no
from engine.physics.prony import PronySeries
from engine.physics.shift import ShiftLaw, wlf_change_reference

__all__ = [
    "CSV_COLUMNS",
    "EXTENSIONS",
    "FORMAT_NAME",
    "FORMAT_VERSION",
    "model_record",
    "read_model",
    "series_from_record",
    "shift_law_from_record",
    "write_model",
]

FORMAT_NAME = "quietgrade-model"
FORMAT_VERSION = 1
EXTENSIONS = (".json", ".csv")
CSV_COLUMNS = ("section", "key", "index", "value", "text", "unit")
UNIT_SUFFIXES = (
    ("_kJ_per_mol", "kJ/mol"),
    ("_Pa", "Pa"),
    ("_Hz", "Hz"),
    ("_C", "degC"),
    ("_K", "K"),
    ("_s", "s"),
)
FLAG_KEYS = frozenset({"vertical_shift", "bridged"})  # yes/no cells in CSV
LIST_KEYS = {
    "prony": ("tau_s", "modulus_Pa", "g"),
    "shift_factors": ("temperature_C", "log_aT", "bridged"),
}
UNITS = {
    "temperature": "degC",
    "temperature_difference": "K",
    "modulus": "Pa",
    "time": "s",
    "frequency": "Hz",
    "activation_energy": "kJ/mol",
    "log_aT": "log10 of the shift factor aT",
}


def unit_of(key: str) -> str:
    """Unit of a record key from its suffix (empty for a pure number)."""
    return next((unit for suffix, unit in UNIT_SUFFIXES if key.endswith(suffix)), "")


def _floats(values) -> list[float | None]:
    return [finite(v) for v in np.asarray(values, dtype=float).reshape(-1)]


def _optional_floats(values) -> list[float | None] | None:
    return None if values is None else _floats(values)


def _curve_wlf(law: ShiftLaw, reference_C: float) -> tuple[float | None, float | None]:
    """WLF constants of ``law`` at ``reference_C``; (None, None) below its divergence."""
    # Called for a law with a WLF branch only, which has all three constants.
    assert law.wlf_c1 is not None and law.wlf_c2 is not None
    assert law.wlf_reference_C is not None
    try:
        c1, c2 = wlf_change_reference(law.wlf_c1, law.wlf_c2, law.wlf_reference_C, reference_C)
    except FitError:
        return None, None
    return finite(c1), finite(c2)


def model_record(curve: MasterCurve, material_id: str) -> dict:
    """The fitted model of one grade as a plain record (the JSON form of the file).

    Parameters
    ----------
    curve : MasterCurve
        The grade's master curve.
    material_id : str
        The grade id as the library holds it.

    Returns
    -------
    dict
        Sections of keys as the module notes describe; numbers are finite floats or
        ints, missing values None.
    """
    law = curve.shift.law
    prony = curve.prony
    keep = prony.weights > 0.0
    glassy = prony.glassy
    has_wlf = law.kind in ("WLF", "WLF+Arrhenius")
    has_arrhenius = law.kind in ("Arrhenius", "WLF+Arrhenius")
    curve_c1, curve_c2 = _curve_wlf(law, curve.reference_C) if has_wlf else (None, None)
    activation_kJ = None
    if has_arrhenius:
        assert law.activation_J_per_mol is not None  # an Arrhenius branch has its energy
        activation_kJ = finite(law.activation_J_per_mol / 1e3)
    shift = curve.shift
    return {
        "format": {"name": FORMAT_NAME, "version": FORMAT_VERSION, "engine_version": __version__},
        "grade": {
            "id": str(material_id),
            "mode": curve.mode,
            "modulus_symbol": "E" if curve.mode == "tensile" else "G",
        },
        "units": dict(UNITS),
        "curve": {
            "reference_C": finite(curve.reference_C),
            "vertical_shift": bool(curve.vertical_shift),
            "reduced_frequency_low_Hz": finite(10.0 ** curve.log_fr_range[0]),
            "reduced_frequency_high_Hz": finite(10.0 ** curve.log_fr_range[1]),
        },
        "prony": {
            "equilibrium_modulus_Pa": finite(prony.equilibrium),
            "glassy_modulus_Pa": finite(glassy),
            "equilibrium_fraction": finite(prony.equilibrium / glassy) if glassy > 0 else None,
            "terms": int(keep.sum()),
            "tau_s": _floats(prony.tau[keep]),
            "modulus_Pa": _floats(prony.weights[keep]),
            "g": _floats(prony.weights[keep] / glassy) if glassy > 0 else [None] * int(keep.sum()),
        },
        "shift_law": {
            "kind": law.kind,
            "wlf_c1": finite(law.wlf_c1) if has_wlf else None,
            "wlf_c2_K": finite(law.wlf_c2) if has_wlf else None,
            "wlf_reference_C": finite(law.wlf_reference_C) if has_wlf else None,
            "curve_wlf_c1": curve_c1,
            "curve_wlf_c2_K": curve_c2,
            "activation_kJ_per_mol": activation_kJ,
            "arrhenius_anchor_C": (
                finite(law.split_C if law.kind == "WLF+Arrhenius" else law.reference_C)
                if has_arrhenius
                else None
            ),
            "split_C": finite(law.split_C) if law.kind == "WLF+Arrhenius" else None,
            "valid_from_C": finite(curve.temperature_range[0]),
            "valid_to_C": finite(curve.temperature_range[1]),
            "rms": finite(law.rms),
        },
        "shift_factors": {
            "count": int(np.asarray(shift.temperatures).size),
            "temperature_C": _floats(shift.temperatures),
            "log_aT": _floats(shift.log_shift),
            "bridged": [bool(b) for b in np.asarray(shift.bridged).reshape(-1)],
            "log_aT_low": _optional_floats(getattr(shift, "log_shift_low", None)),
            "log_aT_high": _optional_floats(getattr(shift, "log_shift_high", None)),
        },
        "about": {"caution": CAUTION},
    }


# -- rebuilding the model ---------------------------------------------------------------
def series_from_record(record: dict) -> PronySeries:
    """The Prony series of a model record (the zero terms left out of the file stay out).

    Raises
    ------
    InputError
        When the record lacks a Prony value or holds one the series cannot take.
    """
    try:
        p = record["prony"]
        return PronySeries(
            tau=np.asarray(p["tau_s"], dtype=float),
            weights=np.asarray(p["modulus_Pa"], dtype=float),
            equilibrium=float(p["equilibrium_modulus_Pa"]),
        )
    except KeyError as exc:
        raise InputError(f"model record lacks the Prony value {exc}") from None
    except (TypeError, ValueError) as exc:
        raise InputError(f"model record: the Prony series is not usable ({exc})") from None


def shift_law_from_record(record: dict) -> ShiftLaw:
    """The shift law of a model record, zero at the master curve's reference temperature.

    Raises
    ------
    InputError
        When the record lacks a value the law of its kind needs.
    """
    try:
        s = record["shift_law"]
        kind = s["kind"]
        energy = s["activation_kJ_per_mol"]
        law = ShiftLaw(
            kind=kind,
            reference_C=float(record["curve"]["reference_C"]),
            wlf_c1=s["wlf_c1"],
            wlf_c2=s["wlf_c2_K"],
            wlf_reference_C=s["wlf_reference_C"],
            activation_J_per_mol=None if energy is None else energy * 1e3,
            split_C=s["split_C"],
            rms=float("nan") if s["rms"] is None else s["rms"],
        )
    except KeyError as exc:
        raise InputError(f"model record lacks the shift-law value {exc}") from None
    needs = {
        "WLF": ("wlf_c1", "wlf_c2", "wlf_reference_C"),
        "Arrhenius": ("activation_J_per_mol",),
        "WLF+Arrhenius": ("wlf_c1", "wlf_c2", "wlf_reference_C", "activation_J_per_mol", "split_C"),
        "none": (),
    }
    if kind not in needs:
        raise InputError(
            f"model record: shift law kind '{kind}' is unknown; known: {', '.join(needs)}"
        )
    blank = [name for name in needs[kind] if getattr(law, name) is None]
    if blank:
        raise InputError(f"model record: a {kind} shift law needs {', '.join(blank)}")
    return law


# -- files --------------------------------------------------------------------------------
def _suffix(path: Path, what: str) -> str:
    suffix = path.suffix.lower()
    if suffix not in EXTENSIONS:
        shown = f"'{path.suffix}'" if path.suffix else "no extension"
        raise InputError(
            f"{what} {path.name}: {shown} is not a model file format; accepted "
            f"extensions: {', '.join(EXTENSIONS)}"
        )
    return suffix


def _number(value) -> str:
    return str(value) if isinstance(value, int) else repr(float(value))


def _csv_row(section: str, key: str, index: int | None, value) -> str:
    number = text = ""
    if isinstance(value, bool):
        text = csv_cell(yes_no(value))
        unit = ""
    elif isinstance(value, str):
        text = csv_cell(value)
        unit = ""
    else:
        number = "" if value is None else _number(value)
        unit = unit_of(key)
    cells = [csv_cell(section), csv_cell(key), "" if index is None else str(index)]
    return ",".join([*cells, number, text, csv_cell(unit) if unit else ""])


def model_csv(record: dict) -> bytes:
    """A model record as CSV bytes (UTF-8 with BOM); the module notes give the layout."""
    out = io.StringIO()
    out.write(",".join(CSV_COLUMNS) + "\r\n")
    for section, content in record.items():
        for key, value in content.items():
            if isinstance(value, list):
                for i, item in enumerate(value, start=1):
                    out.write(_csv_row(section, key, i, item) + "\r\n")
            else:
                out.write(_csv_row(section, key, None, value) + "\r\n")
    return ("\ufeff" + out.getvalue()).encode("utf-8")


def model_json(record: dict) -> bytes:
    """A model record as JSON bytes (UTF-8, strict JSON: no NaN)."""
    return (json.dumps(record, indent=1, ensure_ascii=False, allow_nan=False) + "\n").encode()


def write_model(curve: MasterCurve, path: str | Path, material_id: str) -> Path:
    """Write the fitted model of one grade; the extension (.json, .csv) picks the format.

    Parameters
    ----------
    curve : MasterCurve
        The grade's master curve.
    path : str or Path
        Target file; a missing parent folder is created.
    material_id : str
        The grade id as the library holds it.

    Returns
    -------
    Path
        The path written.

    Raises
    ------
    InputError
        When the extension is neither .json nor .csv (nothing is written), or the file
        cannot be written.
    """
    p = Path(path)
    suffix = _suffix(p, "model file")
    record = model_record(curve, material_id)
    data = model_json(record) if suffix == ".json" else model_csv(record)
    try:
        p.parent.mkdir(parents=True, exist_ok=True)
        p.write_bytes(data)
    except OSError as exc:
        reason = exc.strerror or exc.__class__.__name__
        raise InputError(f"cannot write the model file: {reason}", file=str(p)) from None
    return p


def _unquote(text: str) -> str:
    if text.startswith("'") and text[1:].startswith(FORMULA_START):
        return text[1:]
    return text


def _parse_number(cell: str, name: str, row: int) -> int | float:
    try:
        return int(cell)
    except ValueError:
        pass
    try:
        return float(cell)
    except ValueError:
        raise InputError(f"'{cell}' is not a number", file=name, row=row, column="value") from None


def csv_cell_value(key: str, number: str, text: str, name: str, row: int):
    if number and text:
        raise InputError(
            "a row holds a number in 'value' and a text in 'text'; give one of them",
            file=name,
            row=row,
        )
    if number:
        return _parse_number(number, name, row)
    if not text:
        return None
    text = _unquote(text)
    if key in FLAG_KEYS:
        if text not in ("yes", "no"):
            raise InputError(
                f"'{text}' is not a flag; write yes or no", file=name, row=row, column="text"
            )
        return text == "yes"
    return text


def _read_csv(p: Path) -> dict:
    name = str(p)
    try:
        handle = io.StringIO(p.read_text(encoding="utf-8-sig"), newline="")
    except UnicodeDecodeError:
        raise InputError("not a UTF-8 text file", file=name) from None
    reader = csv.reader(handle)
    header = next(reader, None)
    if header is None or tuple(h.strip() for h in header) != CSV_COLUMNS:
        raise InputError(
            f"the header must be {','.join(CSV_COLUMNS)}; this is not a model CSV",
            file=name,
            row=1,
        )
    record: dict = {}
    for row, cells in enumerate(reader, start=2):
        if not any(c.strip() for c in cells):
            continue
        if len(cells) != len(CSV_COLUMNS):
            raise InputError(
                f"{len(cells)} cells; a model row has {len(CSV_COLUMNS)}", file=name, row=row
            )
        section, key, index, number, text, _unit = (c.strip() for c in cells)
        section, key = _unquote(section), _unquote(key)
        if not section or not key:
            raise InputError("blank section or key", file=name, row=row)
        value = csv_cell_value(key, number, text, name, row)
        content = record.setdefault(section, {})
        if not index:
            if key in content:
                raise InputError(f"'{section}.{key}' appears twice", file=name, row=row)
            content[key] = value
            continue
        items = content.setdefault(key, [])
        if not isinstance(items, list) or index != str(len(items) + 1):
            raise InputError(
                f"index '{index}' of '{section}.{key}' is out of order; lists count 1, 2, ...",
                file=name,
                row=row,
                column="index",
            )
        items.append(value)
    for section, keys in LIST_KEYS.items():
        for key in keys:
            record.get(section, {}).setdefault(key, [])  # a list of no entries writes no row
    return record


def read_model(path: str | Path) -> dict:
    """Read a model file (.json or .csv) back into the record of :func:`model_record`.

    Raises
    ------
    InputError
        When the file is missing, has another extension, is not valid JSON or CSV of
        this layout, or is not a quietgrade model of a version this engine reads.
    """
    p = Path(path)
    suffix = _suffix(p, "model file")
    if not p.is_file():
        raise InputError("file not found", file=str(p))
    if suffix == ".csv":
        record = _read_csv(p)
    else:
        try:
            record = json.loads(p.read_text(encoding="utf-8-sig"))
        except (UnicodeDecodeError, json.JSONDecodeError) as exc:
            raise InputError(f"not valid JSON: {exc}", file=str(p)) from None
    fmt = record.get("format") if isinstance(record, dict) else None
    if not isinstance(fmt, dict) or fmt.get("name") != FORMAT_NAME:
        raise InputError(f"not a {FORMAT_NAME} file (no format name {FORMAT_NAME})", file=str(p))
    version = fmt.get("version")
    if not isinstance(version, int) or not 1 <= version <= FORMAT_VERSION:
        raise InputError(
            f"format version {version!r} is not one this engine reads (1 to {FORMAT_VERSION})",
            file=str(p),
        )
    return record
