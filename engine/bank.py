"""Many master curves stacked into arrays, evaluated in one vectorised pass.

Each grade's master curve is tabulated on a uniform log10 reduced-frequency grid
(:meth:`engine.mastercurve.MasterCurve.table`) and its shift law is kept as parameter
arrays, so that E' and E'' of all grades at all window points come from array
arithmetic: shift law -> reduced frequency -> linear interpolation in log-log.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from engine.mastercurve import TABLE_STEP, TOLERANCE_C, MasterCurve
from engine.shift import GAS_CONSTANT, LN10
from engine.units import c_to_k

_KIND = {"none": 0, "WLF": 1, "Arrhenius": 2, "WLF+Arrhenius": 3}
CORRECTION_STEP = 1.0  # K


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

    @classmethod
    def from_curves(cls, curves: dict[str, MasterCurve]) -> CurveBank:
        ids = list(curves)
        tables = [curves[i].table() for i in ids]
        width = max((t[2].size for t in tables), default=1)
        n = len(ids)
        ls = np.empty((n, width))
        ll = np.empty((n, width))
        for k, (_, _, s, l) in enumerate(tables):
            ls[k, : s.size], ls[k, s.size :] = s, s[-1]
            ll[k, : l.size], ll[k, l.size :] = l, l[-1]
        laws = [curves[i].shift.law for i in ids]
        # Measured-minus-law shift corrections on a 1 K grid over each measured range
        # (MasterCurve.log_shift), held at the ends.
        t_lo = np.array([curves[i].temperature_range[0] for i in ids], dtype=float)
        t_hi = np.array([curves[i].temperature_range[1] for i in ids], dtype=float)
        n_corr = np.maximum(np.ceil(t_hi - t_lo).astype(int) + 1, 2) if n else np.zeros(0, int)
        corr = np.zeros((n, int(n_corr.max()) if n else 2))
        for k, i in enumerate(ids):
            grid = t_lo[k] + np.arange(n_corr[k]) * CORRECTION_STEP
            values = curves[i].shift_correction(grid)
            corr[k, : values.size], corr[k, values.size :] = values, values[-1]

        def arr(values):
            return np.array([np.nan if v is None else v for v in values], dtype=float)

        return cls(
            ids=ids,
            modes=np.array([curves[i].mode for i in ids]),
            start=np.array([t[0] for t in tables], dtype=float),
            log_storage=ls,
            log_loss=ll,
            n_nodes=np.array([t[2].size for t in tables]),
            kind=np.array([_KIND[law.kind] for law in laws]),
            reference=arr([law.reference_C for law in laws]),
            c1=arr([law.wlf_c1 for law in laws]),
            c2=arr([law.wlf_c2 for law in laws]),
            wlf_reference=arr([law.wlf_reference_C for law in laws]),
            activation=arr([law.activation_J_per_mol for law in laws]),
            split=arr([law.split_C for law in laws]),
            vertical=np.array([curves[i].vertical_shift for i in ids]),
            fr_lo=np.array([curves[i].log_fr_range[0] for i in ids]),
            fr_hi=np.array([curves[i].log_fr_range[1] for i in ids]),
            gaps=_gap_array([curves[i].gaps for i in ids]),
            t_lo=t_lo,
            t_hi=t_hi,
            correction=corr,
            n_correction=n_corr,
        )

    def __len__(self) -> int:
        return len(self.ids)

    def _raw_law(self, t, g):
        """Unanchored law value at temperatures ``t`` for grades indexed by ``g`` (broadcast)."""
        kind = self.kind[g]
        with np.errstate(invalid="ignore", divide="ignore"):
            c1, c2, tw = self.c1[g], self.c2[g], self.wlf_reference[g]
            wlf = -c1 * (t - tw) / (c2 + t - tw)
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
        g = np.arange(len(self)).reshape((-1,) + (1,) * nd)
        t = t.reshape((1,) * (nd - t.ndim + 1) + t.shape)
        f = f.reshape((1,) * (nd - f.ndim + 1) + f.shape)
        return self._evaluate(g, t, f, self.shift_at(g, t), loss)

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
        g = np.arange(len(self)).reshape((-1,) + (1,) * (nd - 1))
        t = t.reshape(t.shape + (1,) * (nd - t.ndim))
        f = f.reshape(f.shape + (1,) * (nd - f.ndim))
        if shift is None:
            shift = self.shift_at(g, t)
        return self._evaluate(g, t, f, shift, loss)

    def shift_rows(self, temperature) -> np.ndarray:
        """log10 aT where row k of ``temperature`` belongs to grade k."""
        t = np.asarray(temperature, dtype=float)
        g = np.arange(len(self)).reshape((-1,) + (1,) * (t.ndim - 1))
        return self.shift_at(g, t)

    def shift_at(self, g, t):
        """log10 aT of grades ``g`` at temperatures ``t`` (broadcast), as MasterCurve."""
        return self._raw_law(t, g) - self._raw_law(self.reference[g], g) + self._correction(g, t)

    def _correction(self, g, t):
        if self.correction is None:
            return 0.0
        pos = np.clip((t - self.t_lo[g]) / CORRECTION_STEP, 0.0, self.n_correction[g] - 1.0)
        i0 = np.minimum(np.floor(pos).astype(np.intp), self.n_correction[g] - 2)
        w = pos - i0
        rows = np.broadcast_to(g, i0.shape)
        return self.correction[rows, i0] * (1 - w) + self.correction[rows, i0 + 1] * w

    def _flat(self):
        """Tables flattened with their node-to-node differences, for one-gather lookups."""
        cached = getattr(self, "_flat_cache", None)
        if cached is None:
            width = self.log_storage.shape[1]
            ds = np.diff(self.log_storage, axis=1, append=self.log_storage[:, -1:])
            dl = np.diff(self.log_loss, axis=1, append=self.log_loss[:, -1:])
            # The last valid node continues with the slope of the one before it.
            rows = np.arange(len(self))
            last = np.maximum(self.n_nodes - 1, 1)
            ds[rows, last] = ds[rows, last - 1]
            dl[rows, last] = dl[rows, last - 1]
            # Natural-log units so that one exp() turns a node value into a modulus.
            cached = (
                width,
                self.log_storage.ravel() * LN10,
                ds.ravel() * LN10,
                self.log_loss.ravel() * LN10,
                dl.ravel() * LN10,
            )
            self._flat_cache = cached
        return cached

    def _evaluate(self, g, t, f, shift, want_loss=True):
        width, ls_flat, ds_flat, ll_flat, dl_flat = self._flat()
        log_fr = np.log10(f) + shift
        pos = (log_fr - self.start[g]) / self.step
        # Linear in log-log between nodes and beyond the ends (where a Prony series tends
        # to E'' ~ omega and ~ 1/omega with E' flat).
        i0 = np.clip(np.floor(pos).astype(np.intp), 0, np.maximum(self.n_nodes[g] - 2, 0))
        w = pos - i0
        flat = g * width + i0
        storage = np.exp(ls_flat[flat] + w * ds_flat[flat])
        loss = np.exp(ll_flat[flat] + w * dl_flat[flat]) if want_loss else None
        if self.vertical.any():
            scale = np.where(self.vertical[g], c_to_k(t) / c_to_k(self.reference[g]), 1.0)
            storage = storage * scale
            loss = None if loss is None else loss * scale
        single = self.kind[g] == 0
        extrap = (log_fr < self.fr_lo[g] - 1e-9) | (log_fr > self.fr_hi[g] + 1e-9)
        if self.gaps is not None:
            for j in range(self.gaps.shape[1]):
                g_lo, g_hi = self.gaps[g, j, 0], self.gaps[g, j, 1]
                extrap |= (log_fr > g_lo) & (log_fr < g_hi)  # NaN padding compares False
        extrap |= np.where(
            single,
            np.abs(t - self.reference[g]) > TOLERANCE_C,
            (t < self.t_lo[g] - TOLERANCE_C) | (t > self.t_hi[g] + TOLERANCE_C),
        )
        return storage, loss, extrap
