"""A curve bank as one binary record, read back in one go without parsing per grade.

Layout (little-endian)::

    8 bytes   b"QGBANK01"
    8 bytes   length L of the header, unsigned
    L bytes   header: UTF-8 JSON
    ...       zero padding to a multiple of 64 bytes, then each array's raw bytes
              (C order), each starting at a multiple of 64 bytes

The header holds the record's format number, the grade ids, their fit notes, the table
steps, whatever the caller keeps beside them (the library keeps the data hash behind
each row, so that a changed grade is found and restacked alone) and, for each array of
the :class:`~engine.curves.bank.CurveBank` and of its creep-compliance table, its dtype,
shape and offset. Reading makes each array a read-only view of the record's bytes
(``numpy.frombuffer``): nothing is parsed per grade and nothing is copied, so 10,000
grades (about 160 MB) are ready as soon as the bytes are.

Reading checks what it reads: another magic or format number, an array missing, of a
dtype that is not a plain number, past the end of the record or of the wrong shape is
refused with :class:`BankFileError` (the caller then stacks the bank from the fits
again), never half-used.

Examples
--------
>>> from engine.curves.bank import CurveBank
>>> empty = CurveBank.from_curves({})
>>> bank, extra = read_bank(write_bank(empty, {"hashes": []}))
>>> len(bank), extra
(0, {'hashes': []})
"""

from __future__ import annotations

import json
import struct
from dataclasses import fields

import numpy as np

from engine.curves.bank import CurveBank
from engine.physics.creep import ComplianceTable

FORMAT = 1
MAGIC = b"QGBANK01"
ALIGN = 64
_COMPLIANCE = "compliance."
_NOT_ARRAYS = {"ids", "step", "compliance", "notes"}
_KINDS = {"f", "i", "u", "b", "U"}  # float, int, unsigned, bool, text: no objects


class BankFileError(ValueError):
    """A stored bank record that cannot be used (another format, damaged, incomplete)."""


def _arrays(bank: CurveBank) -> dict[str, np.ndarray]:
    out: dict[str, np.ndarray] = {}
    for f in fields(bank):
        value = getattr(bank, f.name)
        if f.name not in _NOT_ARRAYS and isinstance(value, np.ndarray):
            out[f.name] = value
    if bank.compliance is not None:
        for f in fields(bank.compliance):
            value = getattr(bank.compliance, f.name)
            if isinstance(value, np.ndarray):
                out[_COMPLIANCE + f.name] = value
    return out


def _aligned(n: int) -> int:
    return -(-n // ALIGN) * ALIGN


def write_bank(bank: CurveBank, extra: dict | None = None) -> bytes:
    """``bank`` as one binary record; ``extra`` (JSON-ready) is kept beside it."""
    arrays = {name: np.ascontiguousarray(a) for name, a in _arrays(bank).items()}
    layout: dict[str, tuple[str, list[int], int]] = {}
    offset = 0
    for name, a in arrays.items():
        a = a.astype(a.dtype.newbyteorder("<"), copy=False)
        arrays[name] = a
        layout[name] = (a.dtype.str, list(a.shape), offset)
        offset = _aligned(offset + a.nbytes)
    header = json.dumps(
        {
            "format": FORMAT,
            "ids": list(bank.ids),
            "notes": bank.notes,
            "step": bank.step,
            "compliance_step": None if bank.compliance is None else bank.compliance.step,
            "extra": extra or {},
            "arrays": layout,
        }
    ).encode("utf-8")
    base = _aligned(len(MAGIC) + 8 + len(header))
    out = bytearray(base + offset)
    out[: len(MAGIC)] = MAGIC
    out[len(MAGIC) : len(MAGIC) + 8] = struct.pack("<Q", len(header))
    out[len(MAGIC) + 8 : len(MAGIC) + 8 + len(header)] = header
    for name, a in arrays.items():
        at = base + layout[name][2]
        out[at : at + a.nbytes] = a.tobytes()
    return bytes(out)


def read_bank(blob: bytes) -> tuple[CurveBank, dict]:
    """The bank and the ``extra`` of a record made by :func:`write_bank`; the bank's
    arrays are read-only views of ``blob``.

    Raises
    ------
    BankFileError
        The record is of another format, damaged or incomplete.
    """
    head = len(MAGIC) + 8
    if len(blob) < head or blob[: len(MAGIC)] != MAGIC:
        raise BankFileError("the stored curve bank is not a bank record of this format")
    (length,) = struct.unpack("<Q", blob[len(MAGIC) : head])
    try:
        meta = json.loads(bytes(blob[head : head + length]).decode("utf-8"))
        if not isinstance(meta, dict) or meta.get("format") != FORMAT:
            raise BankFileError(f"the stored curve bank is of format {meta.get('format')!r}")
        base = _aligned(head + length)
        members = {}
        for name, (dtype, shape, offset) in meta["arrays"].items():
            kind = np.dtype(dtype)
            if kind.kind not in _KINDS:
                raise BankFileError(f"array {name!r} is of dtype {dtype}, not a plain number")
            count = int(np.prod(shape, dtype=np.int64))
            start = base + int(offset)
            if start < base or start + count * kind.itemsize > len(blob):
                raise BankFileError(f"array {name!r} runs past the end of the record")
            members[name] = np.frombuffer(blob, kind, count, start).reshape(shape)
        ids = meta["ids"]
        compliance = None
        if meta["compliance_step"] is not None:
            compliance = ComplianceTable(
                step=float(meta["compliance_step"]),
                **{
                    f.name: members.pop(_COMPLIANCE + f.name)
                    for f in fields(ComplianceTable)
                    if f.name != "step"
                },
            )
        arrays = {f.name: members.pop(f.name) for f in fields(CurveBank) if f.name in members}
        bank = CurveBank(
            ids=list(ids),
            step=float(meta["step"]),
            compliance=compliance,
            notes=meta["notes"],
            **arrays,
        )
    except BankFileError:
        raise
    except (KeyError, TypeError, ValueError) as exc:
        raise BankFileError(f"the stored curve bank is incomplete or damaged ({exc})") from exc
    _check_shapes(bank, len(ids))
    return bank, meta["extra"]


def _check_shapes(bank: CurveBank, n: int) -> None:
    """Every per-grade array of ``bank`` has ``n`` rows."""
    wrong = [
        f.name
        for f in fields(bank)
        if isinstance(getattr(bank, f.name), np.ndarray) and getattr(bank, f.name).shape[:1] != (n,)
    ]
    if bank.compliance is not None:
        c = bank.compliance
        wrong += [
            _COMPLIANCE + f.name
            for f in fields(c)
            if isinstance(getattr(c, f.name), np.ndarray) and getattr(c, f.name).shape[:1] != (n,)
        ]
    if bank.notes is not None and len(bank.notes) != n:
        wrong.append("notes")
    if wrong:
        raise BankFileError(
            f"the stored curve bank is inconsistent: {', '.join(wrong)} do not have {n} rows"
        )
