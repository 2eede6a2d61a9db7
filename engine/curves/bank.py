"""Many master curves stacked into arrays, evaluated in one vectorised pass.

Each grade's master curve is tabulated on a uniform log10 reduced-frequency grid
(:meth:`engine.curves.mastercurve.MasterCurve.table`) and its shift law is kept as parameter
arrays, so that E' and E'' of all grades at all window points come from array
arithmetic: shift law -> reduced frequency -> linear interpolation in log-log.

Each grade's creep compliance J(t), which static deflection and sag read, comes from its
relaxation spectrum exactly (:func:`engine.physics.creep.retardation_spectra`) and is
tabulated on a log10 reduced-time grid (:class:`engine.physics.creep.ComplianceTable`):
all grades new to the process in one vectorised pass when the bank is built, each grade's
table kept for as long as its spectrum lives, so a bank rebuilt from the same curves
reuses them.

Large evaluations are cut into blocks of grades shared among threads
(:mod:`engine.base.blocks`).
"""

from __future__ import annotations

import threading
import weakref
from collections.abc import Sequence
from dataclasses import dataclass, fields, replace

import numpy as np

from engine.base.blocks import collector_paused, in_blocks, per_block
from engine.base.units import c_to_k
from engine.curves.mastercurve import TABLE_STEP, TOLERANCE_C, MasterCurve, hold_log_shift
from engine.physics.creep import ComplianceTable, retardation_spectra, tabulate_compliance
from engine.physics.prony import PronySeries
from engine.physics.shift import GAS_CONSTANT, LN10

_KIND = {"none": 0, "WLF": 1, "Arrhenius": 2, "WLF+Arrhenius": 3}
CORRECTION_STEP = 1.0  # K


def _padded(rows: Sequence[np.ndarray], width: int) -> np.ndarray:
    """Rows of different lengths (each at least one value) stacked into ``width``
    columns, each padded with its last value."""
    out = np.empty((len(rows), width))
    for k, r in enumerate(rows):
        out[k, : r.size] = r
        out[k, r.size :] = r[-1]
    return out


# Tabulated creep compliance of each spectrum seen in this process (a row of a
# ComplianceTable), kept while the spectrum itself is alive; and the last few stacked
# tables with the spectra they were stacked from, for a bank rebuilt from the same curves.
_COMPLIANCE_ROWS: weakref.WeakKeyDictionary[PronySeries, tuple] = weakref.WeakKeyDictionary()
_STACKED: list[tuple[list[weakref.ref], ComplianceTable]] = []
_STACKED_KEPT = 4
_COMPLIANCE_LOCK = threading.Lock()


def compliance_table(series: Sequence[PronySeries]) -> ComplianceTable:
    """Tabulated creep compliance of each relaxation series (rows in the given order).

    Series met before in the process reuse their rows; the others are solved together
    (:func:`engine.physics.creep.retardation_spectra`, then
    :func:`engine.physics.creep.tabulate_compliance`). The same series in the same
    order as one of the last few calls get that call's table itself.
    """
    with _COMPLIANCE_LOCK:
        for refs, stacked in _STACKED:
            same = len(refs) == len(series)
            if same and all(r() is p for r, p in zip(refs, series, strict=True)):
                return stacked
        cached = [_COMPLIANCE_ROWS.get(p) for p in series]
    missing = [k for k, r in enumerate(cached) if r is None]
    made: dict[int, tuple] = {}
    if missing:
        new = list({id(series[k]): series[k] for k in missing}.values())
        width = max(p.tau.size for p in new)
        tau = np.ones((len(new), width))
        weights = np.zeros((len(new), width))
        for k, p in enumerate(new):
            tau[k, : p.tau.size] = p.tau
            weights[k, : p.tau.size] = p.weights
        equilibrium = np.array([p.equilibrium for p in new])
        table = tabulate_compliance(retardation_spectra(tau, weights, equilibrium))
        made = {id(p): table.row(k) for k, p in enumerate(new)}
        with _COMPLIANCE_LOCK:
            for p in new:
                _COMPLIANCE_ROWS[p] = made[id(p)]
    rows = [r if r is not None else made[id(p)] for p, r in zip(series, cached, strict=True)]
    table = ComplianceTable.from_rows(rows)
    with _COMPLIANCE_LOCK:
        _STACKED.insert(0, ([weakref.ref(p) for p in series], table))
        del _STACKED[_STACKED_KEPT:]
    return table


def _joined(arrays: Sequence[np.ndarray]) -> np.ndarray:
    """Arrays joined along the grade axis; 2-D tables widened to the widest with each
    row's last value."""
    if arrays[0].ndim < 2:
        return np.concatenate(arrays)
    width = max(a.shape[1] for a in arrays)
    wide = [
        a if a.shape[1] == width else np.pad(a, ((0, 0), (0, width - a.shape[1])), mode="edge")
        for a in arrays
    ]
    return np.concatenate(wide)


def _joined_gaps(gaps: Sequence[np.ndarray | None], sizes: Sequence[int]) -> np.ndarray | None:
    """Gap arrays joined along the grade axis, NaN padded (None: a bank without gaps)."""
    width = max((g.shape[1] for g in gaps if g is not None), default=0)
    if width == 0:
        return None
    out = np.full((sum(sizes), width, 2), np.nan)
    row = 0
    for g, size in zip(gaps, sizes, strict=True):
        if g is not None:
            out[row : row + size, : g.shape[1]] = g
        row += size
    return out


def _gap_array(gap_lists) -> np.ndarray | None:
    width = max((len(g) for g in gap_lists), default=0)
    if width == 0:
        return None
    out = np.full((len(gap_lists), width, 2), np.nan)
    for k, gaps in enumerate(gap_lists):
        for j, (lo, hi) in enumerate(gaps):
            out[k, j] = lo, hi
    return out


@dataclass
class CurveBank:
    """Stacked master curves of ``ids`` (in that order). Moduli in each grade's own mode."""

    ids: list[str]
    modes: np.ndarray  # str per grade
    start: np.ndarray  # log10 fR of the first table node, per grade
    log_storage: np.ndarray  # (grades, nodes), padded with the last value
    log_loss: np.ndarray
    n_nodes: np.ndarray  # valid nodes per grade
    kind: np.ndarray  # shift law kind code
    reference: np.ndarray  # [degC]
    c1: np.ndarray
    c2: np.ndarray
    wlf_reference: np.ndarray
    activation: np.ndarray  # [J/mol]
    split: np.ndarray  # [degC]
    vertical: np.ndarray  # bool
    fr_lo: np.ndarray  # covered log10 fR
    fr_hi: np.ndarray
    t_lo: np.ndarray  # measured temperatures [degC]
    t_hi: np.ndarray
    step: float = TABLE_STEP
    gaps: np.ndarray | None = None  # (grades, k, 2) uncovered log10 fR intervals, NaN padded
    correction: np.ndarray | None = None  # (grades, 1 K nodes): measured minus law log aT
    n_correction: np.ndarray | None = None
    compliance: ComplianceTable | None = None  # creep compliance on log10 reduced time
    notes: list[list[str]] | None = None  # each grade's fit notes (MasterCurve.notes)

    @classmethod
    def from_curves(cls, curves: dict[str, MasterCurve]) -> CurveBank:
        with collector_paused():
            return cls._stack(curves)

    @classmethod
    def _stack(cls, curves: dict[str, MasterCurve]) -> CurveBank:
        ids = list(curves)
        n = len(ids)
        rows = []  # one pass over the curves; the arrays are built column by column
        for i in ids:
            c = curves[i]
            start, _, ls, ll = c.table()
            law = c.shift.law
            curve_scalars = (
                start,
                ls.size,
                _KIND[law.kind],
                law.reference_C,
                law.wlf_c1,
                law.wlf_c2,
                law.wlf_reference_C,
                law.activation_J_per_mol,
                law.split_C,
                c.vertical_shift,
                *c.log_fr_range,
                *c.temperature_range,
            )
            rows.append(
                (curve_scalars, ls, ll, c.mode, c.gaps, c.shift.temperatures, c.shift.log_shift)
            )
        columns = zip(*rows, strict=True) if rows else ([],) * 7
        scalars, ls, ll, modes, gaps, temps, measured = columns
        width = max((t.size for t in ls), default=2)
        # One contiguous array per quantity (None: NaN): a column view of the (n, 14)
        # table is strided, and every block of a ranking gathers from these.
        col = dict(enumerate(np.ascontiguousarray(np.array(scalars, dtype=float).reshape(n, 14).T)))
        bank = cls(
            ids=ids,
            modes=np.array(modes, dtype=str),
            start=col[0],
            log_storage=_padded(ls, width),
            log_loss=_padded(ll, width),
            n_nodes=col[1].astype(np.intp),
            kind=col[2].astype(np.intp),
            reference=col[3],
            c1=col[4],
            c2=col[5],
            wlf_reference=col[6],
            activation=col[7],
            split=col[8],
            vertical=col[9].astype(bool),
            fr_lo=col[10],
            fr_hi=col[11],
            gaps=_gap_array(gaps),
            t_lo=col[12],
            t_hi=col[13],
        )
        bank.correction, bank.n_correction = bank._corrections(temps, measured)
        bank.compliance = compliance_table([curves[i].prony for i in ids]) if n else None
        bank.notes = [list(curves[i].notes) for i in ids]
        return bank

    def take(self, rows: Sequence[int] | np.ndarray) -> CurveBank:
        """The bank of grades ``rows`` (positions, in that order)."""
        k = np.asarray(rows, dtype=np.intp).reshape(-1)
        changes: dict = {}
        for f in fields(self):
            value = getattr(self, f.name)
            if isinstance(value, np.ndarray):
                changes[f.name] = value[k]
        changes["ids"] = [self.ids[i] for i in k.tolist()]
        if self.notes is not None:
            changes["notes"] = [self.notes[i] for i in k.tolist()]
        if self.compliance is not None:
            c = self.compliance
            rows_of: dict = {
                f.name: getattr(c, f.name)[k]
                for f in fields(c)
                if isinstance(getattr(c, f.name), np.ndarray)
            }
            changes["compliance"] = replace(c, **rows_of)
        return replace(self, **changes)

    @classmethod
    def concat(cls, banks: Sequence[CurveBank]) -> CurveBank:
        """One bank of the grades of ``banks`` in turn (tables of the same step).

        Padded tables are widened to the widest with their last value (the gaps with
        NaN), which the evaluation never reads beyond each grade's own nodes.
        """
        parts = [b for b in banks if len(b)]
        if not parts:
            return banks[0] if banks else cls.from_curves({})
        if len(parts) == 1:
            return parts[0]
        steps = {b.step for b in parts}
        if len(steps) != 1:
            raise ValueError(f"banks of different table steps cannot be joined: {sorted(steps)}")
        changes: dict = {"ids": [i for b in parts for i in b.ids]}
        for f in fields(cls):
            values = [getattr(b, f.name) for b in parts]
            if f.name == "gaps":
                changes[f.name] = _joined_gaps(values, [len(b) for b in parts])
            elif all(isinstance(v, np.ndarray) for v in values):
                changes[f.name] = _joined(values)
        notes = [b.notes for b in parts]
        changes["notes"] = (
            [row for n in notes if n is not None for row in n]
            if all(n is not None for n in notes)
            else None
        )
        tables = [b.compliance for b in parts]
        if any(t is None for t in tables):
            changes["compliance"] = None
        else:
            first = tables[0]
            assert first is not None  # all present (checked above)
            joined: dict = {
                f.name: _joined([getattr(t, f.name) for t in tables])
                for f in fields(first)
                if isinstance(getattr(first, f.name), np.ndarray)
            }
            changes["compliance"] = replace(first, **joined)
        return replace(parts[0], **changes)

    def _corrections(self, temps, measured):
        """Measured minus law log10 aT of every grade on a 1 K grid over its measured
        temperatures (as :meth:`MasterCurve.shift_correction`: linear between isotherms,
        held at the ends). ``temps`` and ``measured`` hold each grade's isotherm
        temperatures [degC] and measured log10 aT."""
        n = len(temps)
        n_corr = np.maximum(np.ceil(self.t_hi - self.t_lo).astype(np.intp) + 1, 2)
        if n == 0:
            return np.zeros((0, 2)), np.zeros(0, dtype=np.intp)
        m = np.array([t.size for t in temps], dtype=np.intp)
        corr = np.zeros((n, int(n_corr.max())))
        has = np.flatnonzero(m >= 2)  # a single isotherm has no correction
        if has.size == 0:
            return corr, n_corr
        kmax = int(m[has].max())
        x = _padded([temps[k] for k in has], kmax)  # ascending [degC]
        y = _padded([measured[k] for k in has], kmax)
        g = has[:, None]
        y = y - (self._raw_law(x, g) - self._raw_law(self.reference[g], g))
        # Isotherms at or below each grid temperature t_lo + j: count isotherm k at
        # node j >= ceil(x_k - t_lo), then sum along the row.
        ncol = corr.shape[1]
        valid = np.arange(kmax)[None, :] < m[has][:, None]
        node = np.clip(np.ceil(x - self.t_lo[g]), 0, ncol).astype(np.intp)
        rows = np.arange(has.size)[:, None]
        counts = np.bincount((rows * (ncol + 1) + node)[valid], minlength=has.size * (ncol + 1))
        below = np.cumsum(counts.reshape(has.size, ncol + 1)[:, :ncol], axis=1)
        flat = np.clip(below - 1, 0, m[has][:, None] - 2) + rows * kmax
        x0, x1 = np.take(x, flat), np.take(x, flat + 1)
        q = self.t_lo[g] + np.arange(ncol)[None, :] * CORRECTION_STEP
        w = np.clip((q - x0) / (x1 - x0), 0.0, 1.0)
        corr[has] = np.take(y, flat) * (1.0 - w) + np.take(y, flat + 1) * w
        return corr, n_corr

    def __len__(self) -> int:
        return len(self.ids)

    def _raw_law(self, t, g):
        """Unanchored law value at temperatures ``t`` for grades indexed by ``g`` (broadcast)."""
        kind = self.kind[g]
        with np.errstate(invalid="ignore", divide="ignore"):
            c1, c2, tw = self.c1[g], self.c2[g], self.wlf_reference[g]
            wlf = np.where(c2 + t - tw > 0, -c1 * (t - tw) / (c2 + t - tw), np.inf)
            ea = self.activation[g] / (LN10 * GAS_CONSTANT)
            split = self.split[g]
            arr_ref = np.where(kind == 3, split, self.reference[g])
            arr = ea * (1.0 / c_to_k(t) - 1.0 / c_to_k(arr_ref))
            at_split = -c1 * (split - tw) / (c2 + split - tw)
            combined = np.where(t >= split, wlf, at_split + arr)
        out = np.where(kind == 1, wlf, 0.0)
        out = np.where(kind == 2, arr, out)
        return np.where(kind == 3, combined, out)

    def log_shift(self, temperature) -> np.ndarray:
        """log10 aT, shape (grades, *temperature.shape), as MasterCurve.log_shift."""
        t = np.asarray(temperature, dtype=float)
        g = np.arange(len(self)).reshape((-1,) + (1,) * t.ndim)
        return self.shift_at(g, t[None, ...])

    def evaluate(self, temperature, frequency, loss: bool = True):
        """E', E'' [Pa] and the extrapolated flag at every (T, f) for every grade.

        ``temperature`` and ``frequency`` broadcast together to a shape P; results have
        shape (grades, *P). With ``loss=False`` E'' is not computed (None).
        """
        t = np.asarray(temperature, dtype=float)
        f = np.asarray(frequency, dtype=float)
        nd = max(t.ndim, f.ndim)
        t = t.reshape((1,) * (nd - t.ndim + 1) + t.shape)
        f = f.reshape((1,) * (nd - f.ndim + 1) + f.shape)
        return self._run(t, f, None, loss)

    def evaluate_rows(self, temperature, frequency, loss: bool = True, shift=None):
        """Like :meth:`evaluate`, but row k of the inputs belongs to grade k.

        ``temperature`` and ``frequency`` broadcast to shape (grades, ...). ``shift`` may
        hold :meth:`shift_rows` of ``temperature`` computed once for repeated calls.
        """
        t = np.asarray(temperature, dtype=float)
        f = np.asarray(frequency, dtype=float)
        if t.shape[:1] != (len(self),) and f.shape[:1] != (len(self),):
            raise ValueError(f"first axis must have one row per grade ({len(self)})")
        nd = max(t.ndim, f.ndim)
        t = t.reshape(t.shape + (1,) * (nd - t.ndim))
        f = f.reshape(f.shape + (1,) * (nd - f.ndim))
        return self._run(t, f, shift, loss)

    def _run(self, t, f, shift, want_loss: bool):
        """Evaluate in blocks of grades into preallocated results.

        ``t``, ``f`` (and ``shift``) have a leading grade axis of length 1 (shared by
        every grade) or ``len(self)`` (row k belongs to grade k).
        """
        n = len(self)
        parts = [t.shape, f.shape] + ([] if shift is None else [np.shape(shift)])
        shape = (n,) + np.broadcast_shapes(*(s[1:] for s in parts))
        storage = np.empty(shape)
        loss = np.empty(shape) if want_loss else None
        extrap = np.empty(shape, dtype=bool)
        points = int(np.prod(shape[1:], dtype=np.int64))

        def rows(a, b, x):
            return x[a:b] if x.shape[0] == n else x  # else shared by every grade

        def work(a: int, b: int) -> None:
            g = np.arange(a, b).reshape((-1,) + (1,) * (len(shape) - 1))
            tb, fb = rows(a, b, t), rows(a, b, f)
            sb = self.shift_at(g, tb) if shift is None else rows(a, b, np.asarray(shift))
            self._evaluate_into(
                g,
                tb,
                fb,
                sb,
                storage[a:b],
                None if loss is None else loss[a:b],
                extrap[a:b],
            )

        in_blocks(n, work, per_block(points))
        return storage, loss, extrap

    def shift_rows(self, temperature) -> np.ndarray:
        """log10 aT where row k of ``temperature`` belongs to grade k."""
        t = np.asarray(temperature, dtype=float)
        g = np.arange(len(self)).reshape((-1,) + (1,) * (t.ndim - 1))
        return self.shift_at(g, t)

    def shift_at(self, g, t):
        """log10 aT of grades ``g`` at temperatures ``t`` (broadcast), as MasterCurve."""
        with np.errstate(invalid="ignore"):
            raw = self._raw_law(t, g) - self._raw_law(self.reference[g], g)
        return hold_log_shift(raw + self._correction(g, t), t, self.reference[g])

    def _correction(self, g, t):
        if self.correction is None:
            return 0.0
        pos = np.clip((t - self.t_lo[g]) / CORRECTION_STEP, 0.0, self.n_correction[g] - 1.0)
        i0 = np.minimum(np.floor(pos).astype(np.intp), self.n_correction[g] - 2)
        w = pos - i0
        rows = np.broadcast_to(g, i0.shape)
        return self.correction[rows, i0] * (1 - w) + self.correction[rows, i0 + 1] * w

    def _nodes(self, g, log_fr):
        """Flat table index of the node below ``log_fr`` and the fraction beyond it.

        Linear in log-log between nodes and beyond the ends (where a Prony series tends
        to E'' ~ omega and ~ 1/omega with E' flat): the node index is held to the
        grade's first and last segment, the fraction runs on below 0 and above 1.
        """
        width = self.log_storage.shape[1]
        pos = log_fr - self.start[g]
        pos *= 1.0 / self.step
        i0 = np.floor(pos)
        np.clip(i0, 0.0, np.maximum(self.n_nodes[g] - 2, 0), out=i0)
        pos -= i0  # the fraction w
        flat = i0.astype(np.intp)
        flat += g * width
        return flat, pos

    @staticmethod
    def _interpolate(table, flat, w, out=None):
        """table[flat] + w (table[flat + 1] - table[flat]), into ``out``.

        ``flat`` holds valid indices, so the takes skip their bounds check
        (``mode="clip"``: with ``out`` given, the checking mode also copies), and
        ``table[1:]`` read at ``flat`` is ``table`` at ``flat + 1`` without the sum.
        """
        low = np.take(table, flat, out=out, mode="clip")
        high = np.take(table[1:], flat, mode="clip")
        high -= low
        high *= w
        low += high
        return low

    def log_storage_at(self, g, log_reduced_frequency) -> np.ndarray:
        """log10 of the reference-temperature storage modulus [Pa] of grades ``g`` at
        ``log_reduced_frequency`` [log10 Hz] (broadcast; no vertical factor)."""
        flat, w = self._nodes(np.asarray(g), np.asarray(log_reduced_frequency, dtype=float))
        return self._interpolate(self.log_storage.ravel(), flat, w)

    def compliance_rows(self, temperature, time, shift=None):
        """Creep compliance J [1/Pa] in each grade's own mode and the extrapolated flag,
        a time ``time`` [s] after a step load at ``temperature`` [degC]; row k of the
        inputs belongs to grade k (they broadcast to shape (grades, ...)).

        ``shift`` may hold :meth:`shift_rows` of ``temperature``. J at T is
        J_ref(t / aT) / (T / T0 with a vertical shift), as the modulus scales by T / T0
        (Ferry 1980, ch. 11). Flagged as extrapolated where 1 / (2 pi t / aT), the
        reduced frequency the creep up to t is governed by, or T leaves the data, as in
        :meth:`evaluate`. A bank built without spectra (by hand) reads J as
        1 / E'(f = 1 / (2 pi t)), which is exact for a grade whose modulus does not
        depend on frequency.
        """
        t = np.asarray(temperature, dtype=float)
        time = np.asarray(time, dtype=float)
        if t.shape[:1] != (len(self),) and time.shape[:1] != (len(self),):
            raise ValueError(f"first axis must have one row per grade ({len(self)})")
        nd = max(t.ndim, time.ndim)
        t = t.reshape(t.shape + (1,) * (nd - t.ndim))
        time = time.reshape(time.shape + (1,) * (nd - time.ndim))
        if self.compliance is None:
            storage, _, extrap = self.evaluate_rows(
                t, 1.0 / (2.0 * np.pi * time), loss=False, shift=shift
            )
            return 1.0 / storage, extrap
        shape = (len(self),) + np.broadcast_shapes(t.shape[1:], time.shape[1:])
        g = np.arange(len(self)).reshape((-1,) + (1,) * (len(shape) - 1))
        log_shift = self.shift_at(g, t) if shift is None else np.asarray(shift)
        log_time = np.broadcast_to(np.log10(time) - log_shift, shape)
        compliance = 10.0 ** self.compliance.log_compliance_at(g, log_time)
        if self.vertical.any():
            compliance /= self.vertical_factor(g, t)
        extrap = np.empty(shape, dtype=bool)
        self._flag_extrapolated(g, t, -np.log10(2.0 * np.pi) - log_time, extrap)
        return compliance, extrap

    def _flag_extrapolated(self, g, t, log_fr, out) -> None:
        """Extrapolated: outside the covered reduced frequencies, in a gap, or outside
        the measured temperatures (a single isotherm: away from its temperature)."""
        np.less(log_fr, self.fr_lo[g] - 1e-9, out=out)
        out |= log_fr > self.fr_hi[g] + 1e-9
        if self.gaps is not None:
            gi = np.asarray(g)
            # One grade a row (as evaluation in blocks has it): only the rows of grades
            # with a gap are compared, most grades having none.
            per_row = gi.ndim == out.ndim and gi.size == out.shape[0]
            for j in range(self.gaps.shape[1]):
                g_lo, g_hi = self.gaps[g, j, 0], self.gaps[g, j, 1]
                if per_row:
                    rows = np.flatnonzero(~np.isnan(g_lo.ravel()))
                    if rows.size < out.shape[0]:
                        if rows.size:
                            x = np.broadcast_to(log_fr, out.shape)[rows]
                            out[rows] |= (x > g_lo[rows]) & (x < g_hi[rows])
                        continue
                if not np.isnan(g_lo).all():
                    out |= (log_fr > g_lo) & (log_fr < g_hi)  # NaN pads compare False
        out |= np.where(
            self.kind[g] == 0,
            np.abs(t - self.reference[g]) > TOLERANCE_C,
            (t < self.t_lo[g] - TOLERANCE_C) | (t > self.t_hi[g] + TOLERANCE_C),
        )

    def _evaluate_into(self, g, t, f, shift, out_storage, out_loss, out_extrap) -> None:
        log_fr = np.log10(f) + shift
        if log_fr.shape != out_storage.shape:
            log_fr = np.broadcast_to(log_fr, out_storage.shape).copy()
        self._flag_extrapolated(g, t, log_fr, out_extrap)
        flat, w = self._nodes(g, log_fr)
        for table, out in ((self.log_storage, out_storage), (self.log_loss, out_loss)):
            if out is not None:
                self._interpolate(table.ravel(), flat, w, out=out)
                out *= LN10
                np.exp(out, out=out)
        if self.vertical[g].any():
            scale = self.vertical_factor(g, t)
            out_storage *= scale
            if out_loss is not None:
                out_loss *= scale

    def vertical_factor(self, g, t):
        """Modulus factor T / T0 of grades ``g`` with a vertical shift at ``t`` [degC]
        (1 for the others), as MasterCurve."""
        return np.where(self.vertical[g], c_to_k(t) / c_to_k(self.reference[g]), 1.0)
