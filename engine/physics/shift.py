"""Time–temperature superposition: shift laws and automatic horizontal shifting.

Glossary: ``log_shift`` is log10 aT, the horizontal shift that maps a measurement at
temperature T onto the reference temperature: log10 fR = log10 f + log10 aT. It is zero
at the reference temperature and falls as temperature rises.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass, field

import numpy as np

from engine.base.errors import FitError
from engine.base.units import c_to_k

GAS_CONSTANT = 8.314462618  # J/(mol K), CODATA 2018 exact value
LN10 = np.log(10.0)

# Williams, Landel & Ferry (1955): "universal" constants with Tg as reference.
WLF_UNIVERSAL_C1 = 17.44
WLF_UNIVERSAL_C2 = 51.6  # K


def wlf_log_shift(temperature, c1: float, c2: float, reference: float):
    """WLF shift factor.

    Parameters
    ----------
    temperature : array [degC]
    c1 : float [-]
    c2 : float [K]
    reference : float [degC]
        Temperature at which log aT = 0.

    Returns
    -------
    log_shift : array [-]
        log10 aT.

    Notes
    -----
    log10 aT = -C1 (T - T0) / (C2 + T - T0)   (WLF 1955, eq. 1). Valid from Tg to about
    Tg + 100 K; the expression diverges at T = T0 - C2.

    References
    ----------
    Williams, M. L., Landel, R. F., Ferry, J. D. (1955). J. Am. Chem. Soc. 77, 3701-3707.
    """
    dt = np.asarray(temperature, dtype=float) - reference
    return -c1 * dt / (c2 + dt)


def wlf_change_reference(c1: float, c2: float, reference: float, new_reference: float):
    """WLF constants for another reference temperature.

    Notes
    -----
    C2' = C2 + T1 - T0 and C1' = C1 C2 / C2' (Ferry 1980, ch. 11), which leaves the
    curve log aT(T) unchanged apart from the additive constant that puts zero at T1.

    Returns
    -------
    (c1_new, c2_new) : tuple of float
    """
    c2_new = c2 + (new_reference - reference)
    if c2_new <= 0:
        raise FitError(
            f"cannot move the WLF reference to {new_reference:g} degC: it lies below the "
            f"divergence temperature {reference - c2:g} degC"
        )
    return c1 * c2 / c2_new, c2_new


def arrhenius_log_shift(temperature, activation_energy: float, reference: float):
    """Arrhenius shift factor.

    Parameters
    ----------
    temperature : array [degC]
    activation_energy : float [J/mol]
    reference : float [degC]

    Notes
    -----
    log10 aT = Ea / (2.303 R) (1/T - 1/T0), temperatures in kelvin. Used below Tg and for
    secondary relaxations (Ferry 1980, ch. 11).
    """
    inv = 1.0 / c_to_k(temperature) - 1.0 / c_to_k(reference)
    return activation_energy / (LN10 * GAS_CONSTANT) * inv


@dataclass(frozen=True)
class ShiftLaw:
    """A fitted shift law: WLF above ``split_C``, Arrhenius below, continuous at the split.

    ``kind`` is "WLF", "Arrhenius" or "WLF+Arrhenius". ``log_shift(T)`` is zero at
    ``reference_C``.
    """

    kind: str
    reference_C: float
    wlf_c1: float | None = None
    wlf_c2: float | None = None
    wlf_reference_C: float | None = None
    activation_J_per_mol: float | None = None
    split_C: float | None = None
    rms: float = float("nan")
    notes: tuple[str, ...] = ()

    def _raw(self, temperature):
        t = np.asarray(temperature, dtype=float)
        if self.kind == "none":
            return np.zeros_like(t)
        if self.kind == "WLF":
            return self._wlf(t)
        if self.kind == "Arrhenius":
            return arrhenius_log_shift(t, self.activation_J_per_mol, self.reference_C)
        wlf = self._wlf(t)
        at_split = wlf_log_shift(self.split_C, self.wlf_c1, self.wlf_c2, self.wlf_reference_C)
        arr = at_split + arrhenius_log_shift(t, self.activation_J_per_mol, self.split_C)
        return np.where(t >= self.split_C, wlf, arr)

    def _wlf(self, t):
        """WLF, +inf at and below its divergence T0 - C2 (the law has no meaning there)."""
        dt = t - self.wlf_reference_C
        with np.errstate(divide="ignore", invalid="ignore"):
            value = wlf_log_shift(t, self.wlf_c1, self.wlf_c2, self.wlf_reference_C)
        return np.where(self.wlf_c2 + dt > 0, value, np.inf)

    def log_shift(self, temperature):
        """log10 aT at ``temperature`` [degC], zero at the reference temperature."""
        return self._raw(temperature) - self._raw(self.reference_C)

    def to_dict(self) -> dict:
        return {
            "kind": self.kind,
            "reference_C": self.reference_C,
            "wlf_c1": self.wlf_c1,
            "wlf_c2": self.wlf_c2,
            "wlf_reference_C": self.wlf_reference_C,
            "activation_J_per_mol": self.activation_J_per_mol,
            "split_C": self.split_C,
            "rms": self.rms,
            "notes": list(self.notes),
        }

    @classmethod
    def from_dict(cls, data: dict) -> ShiftLaw:
        data = dict(data)
        data["notes"] = tuple(data.get("notes", ()))
        return cls(**data)


@dataclass(frozen=True)
class Isotherm:
    """One isotherm: log10 frequency ascending, log10 E' and log10 loss factor."""

    temperature: float
    log_frequency: np.ndarray
    log_storage: np.ndarray
    log_loss_factor: np.ndarray


def split_isotherms(
    temperature,
    frequency,
    storage_modulus,
    loss_factor,
    decimals: int = 1,
    labels=None,
    temperatures=None,
):
    """Group measured points into isotherms, ordered by temperature.

    With ``labels`` (the isotherm of each point, see :mod:`engine.physics.isotherms`) and
    ``temperatures`` (each isotherm's mean temperature [degC]) the points are grouped as
    given; otherwise points whose temperatures agree to ``decimals`` places form one
    isotherm. Within an isotherm points are sorted by frequency and repeated frequencies
    are averaged in log.
    """
    if labels is None:
        t = np.round(np.asarray(temperature, dtype=float), decimals)
        values, labels = np.unique(t, return_inverse=True)
        temperatures = values
    labels = np.asarray(labels, dtype=np.intp)
    lf = np.log10(np.asarray(frequency, dtype=float))
    ls = np.log10(np.asarray(storage_modulus, dtype=float))
    # A loss factor of exactly zero is allowed in the data; floor it for the log scale.
    eta = np.maximum(np.asarray(loss_factor, dtype=float), 1e-6)
    le = np.log10(eta)
    out = []
    for k, value in enumerate(np.asarray(temperatures, dtype=float)):
        sel = labels == k
        freqs, inverse = np.unique(np.round(lf[sel], 6), return_inverse=True)
        count = np.bincount(inverse)
        out.append(
            Isotherm(
                float(value),
                freqs,
                np.bincount(inverse, ls[sel]) / count,
                np.bincount(inverse, le[sel]) / count,
            )
        )
    return out


@dataclass(frozen=True)
class PairShift:
    """Shift between two neighbouring isotherms: colder ``lower`` and warmer ``upper``.

    ``delta`` = log aT(upper) - log aT(lower) (negative when superposition holds).
    ``sigma`` is its standard error [decades]; ``overlap`` the number of points compared.
    ``status``: "ok", "no overlap" or "ill-determined" (flat or ambiguous overlap).
    """

    lower: float
    upper: float
    delta: float
    sigma: float
    overlap: int
    mismatch: float
    status: str


MIN_OVERLAP_POINTS = 3
ILL_DETERMINED_SIGMA = 0.25  # decades; common practice threshold of this project
MAX_OVERLAP_RMS = 0.1  # decades: a best overlap worse than this is no overlap at all
AMBIGUITY_DECADES = 0.3  # two overlap minima this far apart make a pair ill-determined
ROBUST_PASSES = 2  # iteratively reweighted passes of the shift-law fit
_NOISE_FLOOR = 0.003  # log10 units, floor on the residual scatter used for sigma
_GRID_STEP = 0.01  # decades


def _interp_inside(x_new, x, y):
    """Linear interpolation at x_new with a mask of the points that lie inside [x0, xn]."""
    inside = (x_new >= x[0]) & (x_new <= x[-1])
    return np.interp(x_new, x, y), inside


def _pair_cost(lower: Isotherm, upper: Isotherm, deltas: np.ndarray):
    """Mean squared mismatch and overlap count for each candidate shift of ``upper``."""
    d = deltas[:, None]
    # Warmer points shifted onto the colder isotherm.
    xu = upper.log_frequency[None, :] + d
    ys, m1 = _interp_inside(xu, lower.log_frequency, lower.log_storage)
    ye, _ = _interp_inside(xu, lower.log_frequency, lower.log_loss_factor)
    r1 = (ys - upper.log_storage) ** 2 + (ye - upper.log_loss_factor) ** 2
    # Colder points against the shifted warmer isotherm.
    xl = lower.log_frequency[None, :] - d
    ys2, m2 = _interp_inside(xl, upper.log_frequency, upper.log_storage)
    ye2, _ = _interp_inside(xl, upper.log_frequency, upper.log_loss_factor)
    r2 = (ys2 - lower.log_storage) ** 2 + (ye2 - lower.log_loss_factor) ** 2
    sse = np.sum(r1 * m1, axis=1) + np.sum(r2 * m2, axis=1)
    n = m1.sum(axis=1) + m2.sum(axis=1)
    cost = np.where(n >= MIN_OVERLAP_POINTS, sse / np.maximum(n, 1), np.inf)
    return cost, n


def _ambiguous(deltas: np.ndarray, cost: np.ndarray) -> bool:
    """True when a second, distinct local minimum of the overlap cost nearly ties the best.

    Flat or wavy isotherms can overlap almost equally well at two shifts; such a pair
    says little about the shift and is left to the law.
    """
    finite = np.isfinite(cost)
    if finite.sum() < 3:
        return False
    c = np.where(finite, cost, np.inf)
    inner = (c[1:-1] <= c[:-2]) & (c[1:-1] <= c[2:]) & finite[1:-1]
    minima = np.flatnonzero(inner) + 1
    if minima.size < 2:
        return False
    order = minima[np.argsort(c[minima])]
    best, second = order[0], order[1:]
    far = np.abs(deltas[second] - deltas[best]) > AMBIGUITY_DECADES
    close = c[second] <= 2.0 * c[best] + _NOISE_FLOOR**2
    return bool(np.any(far & close))


def pair_shift(lower: Isotherm, upper: Isotherm) -> PairShift:
    """Horizontal shift of ``upper`` onto ``lower`` by least-squares overlap.

    Notes
    -----
    The warmer isotherm is slid along log f; for each candidate shift the points of each
    isotherm that fall within the other's frequency span are compared by linear
    interpolation, on log10 E' and log10 tan δ together (tan δ needs no vertical shift).
    The cost is the mean squared mismatch over at least three overlapping points. A
    coarse grid search over all shifts that leave an overlap is refined on a fine grid;
    the standard error of the shift comes from the curvature of the summed squares,
    sigma^2 = 2 s^2 / S''. Shifts are restricted to delta <= +0.05 decade, as shift
    factors fall with temperature (method of reduced variables, Ferry 1980, ch. 11).
    """
    span = (lower.log_frequency[-1] - lower.log_frequency[0]) + (
        upper.log_frequency[-1] - upper.log_frequency[0]
    )
    low = -(span + 0.5)
    coarse = np.arange(low, 0.05 + 1e-12, 0.05)
    cost, n = _pair_cost(lower, upper, coarse)
    if not np.isfinite(cost).any():
        return PairShift(
            lower.temperature, upper.temperature, np.nan, np.inf, 0, np.nan, "no overlap"
        )
    best = coarse[np.argmin(cost)]
    ambiguous = _ambiguous(coarse, cost)
    fine = np.arange(best - 0.06, best + 0.06 + 1e-12, _GRID_STEP / 5)
    fine = fine[fine <= 0.05 + 1e-12]
    cost_f, n_f = _pair_cost(lower, upper, fine)
    k = int(np.argmin(cost_f))
    delta = float(fine[k])
    npts = int(n_f[k])
    cmin = float(cost_f[k])
    # Curvature of the summed squares S = n * cost from neighbours two steps away.
    h = 2 * (fine[1] - fine[0]) if fine.size > 1 else _GRID_STEP
    if 2 <= k < fine.size - 2 and np.isfinite(cost_f[[k - 2, k + 2]]).all():
        s_pp = npts * (cost_f[k - 2] - 2 * cost_f[k] + cost_f[k + 2]) / h**2
    else:
        s_pp = 0.0
    s2 = max(cmin * npts / max(npts - 1, 1), _NOISE_FLOOR**2)
    sigma = float(np.sqrt(2 * s2 / s_pp)) if s_pp > 0 else np.inf
    if np.sqrt(cmin) > MAX_OVERLAP_RMS:
        status = "no overlap"
    elif sigma > ILL_DETERMINED_SIGMA or ambiguous:
        status = "ill-determined"
    else:
        status = "ok"
    return PairShift(lower.temperature, upper.temperature, delta, sigma, npts, cmin, status)


@dataclass
class ShiftResult:
    """Shift factors of every isotherm and the law fitted to them."""

    temperatures: np.ndarray  # [degC]
    log_shift: np.ndarray  # log10 aT from the data (bridged where flagged)
    bridged: np.ndarray  # bool: taken from the fitted law, not from the overlap
    law: ShiftLaw
    pairs: list[PairShift] = field(default_factory=list)
    notes: list[str] = field(default_factory=list)
    log_shift_sd: np.ndarray | None = None  # posterior sd of log10 aT [decades]

    @property
    def log_shift_low(self) -> np.ndarray | None:
        """Lower end of the 95 % interval of log10 aT of each isotherm."""
        return None if self.log_shift_sd is None else self.log_shift - 1.96 * self.log_shift_sd

    @property
    def log_shift_high(self) -> np.ndarray | None:
        """Upper end of the 95 % interval of log10 aT of each isotherm."""
        return None if self.log_shift_sd is None else self.log_shift + 1.96 * self.log_shift_sd

    def to_dict(self) -> dict:
        return {
            "log_shift_sd": None if self.log_shift_sd is None else self.log_shift_sd.tolist(),
            "temperatures_C": self.temperatures.tolist(),
            "log_shift": self.log_shift.tolist(),
            "bridged": self.bridged.tolist(),
            "law": self.law.to_dict(),
            "pairs": [
                {
                    "lower_C": p.lower,
                    "upper_C": p.upper,
                    "delta": None if not np.isfinite(p.delta) else p.delta,
                    "sigma": None if not np.isfinite(p.sigma) else p.sigma,
                    "overlap": p.overlap,
                    "status": p.status,
                }
                for p in self.pairs
            ],
            "notes": list(self.notes),
        }

    @classmethod
    def from_dict(cls, data: dict) -> ShiftResult:
        pairs = [
            PairShift(
                p["lower_C"],
                p["upper_C"],
                np.nan if p["delta"] is None else p["delta"],
                np.inf if p["sigma"] is None else p["sigma"],
                p["overlap"],
                np.nan,
                p["status"],
            )
            for p in data["pairs"]
        ]
        return cls(
            np.asarray(data["temperatures_C"], dtype=float),
            np.asarray(data["log_shift"], dtype=float),
            np.asarray(data["bridged"], dtype=bool),
            ShiftLaw.from_dict(data["law"]),
            pairs,
            list(data["notes"]),
            None
            if data.get("log_shift_sd") is None
            else np.asarray(data["log_shift_sd"], dtype=float),
        )


def _law_from_params(kind, params, reference, split, wlf_ref):
    if kind == "WLF":
        return ShiftLaw("WLF", reference, params[0], params[1], wlf_ref)
    if kind == "Arrhenius":
        return ShiftLaw("Arrhenius", reference, activation_J_per_mol=params[0] * 1e3)
    return ShiftLaw(
        "WLF+Arrhenius", reference, params[0], params[1], wlf_ref, params[2] * 1e3, split
    )


def fit_shift_law(
    pairs: list[PairShift],
    reference: float,
    split: float | None,
    glassy_without_transition: bool = False,
) -> ShiftLaw:
    """Fit WLF above ``split`` and Arrhenius below it to the pairwise shifts.

    Parameters
    ----------
    pairs : list of PairShift
        Only pairs with status "ok" are used, weighted by 1/sigma^2.
    reference : float [degC]
        Reference temperature of the master curve.
    split : float or None [degC]
        Glass transition used to divide the WLF and Arrhenius regions. None when the
        data show no transition; then ``glassy_without_transition`` chooses Arrhenius
        (all glassy) or WLF (all rubbery).

    Notes
    -----
    The law is fitted to the measured pairwise differences log aT(T_upper) - log aT(T_lower)
    rather than to accumulated shifts, so an error in one pair does not carry into the
    others. WLF (Williams, Landel & Ferry 1955) is parametrised at the lower end of its
    region, Arrhenius below Tg is anchored to it at Tg so the law is continuous. With C2
    fixed the law is linear in C1 and Ea, so the weighted least-squares fit is a linear
    solve (normal equations, bounds enforced) inside a search over log C2 by nested
    grids refined to 1e-4 in log C2 (variable projection; Golub & Pereyra 1973).
    Bounds: 0.5 <= C1 <= 100,
    5 K <= C2 <= 2000 K, 1 kJ/mol <= Ea <= 2000 kJ/mol.
    """
    good = [p for p in pairs if p.status == "ok"]
    lo = np.array([p.lower for p in good])
    hi = np.array([p.upper for p in good])
    delta = np.array([p.delta for p in good])
    weight = 1.0 / np.maximum(np.array([p.sigma for p in good]), 0.005)
    if split is None:
        kind = "Arrhenius" if glassy_without_transition else "WLF"
        wlf_ref = reference
    else:
        n_above = int(np.sum(lo >= split - 1e-9))
        n_below = int(np.sum(hi <= split + 1e-9))
        if n_above >= 2 and n_below >= 1:
            kind = "WLF+Arrhenius"
        elif n_above >= 2 or n_below < 1:
            kind = "WLF"
        else:
            kind = "Arrhenius"
        wlf_ref = split
    if kind == "WLF" and split is not None and not np.any(lo >= split - 1e-9):
        wlf_ref = reference
    if len(good) < (2 if kind == "WLF" else 1):
        raise FitError(
            f"only {len(good)} well-determined isotherm pair(s): too few to fit a {kind} law"
        )

    inv_k = 1.0 / (LN10 * GAS_CONSTANT)

    def wlf_column(t, c2):
        """d log aT / d C1 at temperatures t for each C2 of the array c2: shape (K, n)."""
        c2 = np.asarray(c2, dtype=float)[:, None]
        with np.errstate(divide="ignore", invalid="ignore"):
            g = (t - wlf_ref) / (c2 + t - wlf_ref)
        if kind == "WLF+Arrhenius":
            g = np.where(t >= split, g, 0.0)  # g(split) = 0: WLF is referred to the split
        return -g

    def arrhenius_column(t):
        anchor = reference if kind == "Arrhenius" else split
        x = 1e3 * inv_k * (1.0 / c_to_k(t) - 1.0 / c_to_k(anchor))
        return np.where(t >= split, 0.0, x) if kind == "WLF+Arrhenius" else x

    arr_col = arrhenius_column(hi) - arrhenius_column(lo) if kind != "WLF" else None

    def design(c2):
        """Design matrices (K, n, p): the law is linear in (C1, Ea [kJ/mol]) for fixed C2."""
        cols = []
        if kind != "Arrhenius":
            cols.append(wlf_column(hi, c2) - wlf_column(lo, c2))
        if kind != "WLF":
            k = 1 if c2 is None else np.size(c2)
            cols.append(np.broadcast_to(arr_col, (k, arr_col.size)))
        return np.stack(cols, axis=-1)

    if kind == "WLF":
        lb, ub = np.array([0.5]), np.array([100.0])
    elif kind == "Arrhenius":
        lb, ub = np.array([1.0]), np.array([2000.0])
    else:
        lb, ub = np.array([0.5, 1.0]), np.array([100.0, 2000.0])

    def solve(c2, w):
        """Weighted least squares in (C1, Ea) for each fixed C2, clipped to the bounds.

        Returns parameters (K, p) and summed squares (K,). With two parameters, where
        the unconstrained optimum leaves the bounds, each parameter in turn is held at
        its bound and the other solved alone; the better admissible answer is kept.
        """
        a = design(c2) * w[None, :, None]
        y = delta * w
        ata = np.einsum("kni,knj->kij", a, a)
        aty = np.einsum("kni,n->ki", a, y)

        def cost(x):
            r = np.einsum("kni,ki->kn", a, x) - y
            return np.sum(r * r, axis=1)

        if a.shape[2] == 1:
            x = np.clip(aty / np.maximum(ata[:, :, 0], 1e-300), lb, ub)
            return x, cost(x)
        det = ata[:, 0, 0] * ata[:, 1, 1] - ata[:, 0, 1] ** 2
        safe = np.where(np.abs(det) > 1e-300, det, 1e-300)
        x0 = (ata[:, 1, 1] * aty[:, 0] - ata[:, 0, 1] * aty[:, 1]) / safe
        x1 = (ata[:, 0, 0] * aty[:, 1] - ata[:, 0, 1] * aty[:, 0]) / safe
        free = np.stack([x0, x1], axis=1)
        inside = np.all((free >= lb) & (free <= ub), axis=1) & (np.abs(det) > 1e-300)
        best = np.where(inside[:, None], free, np.clip(free, lb, ub))
        best_cost = cost(best)
        for fixed in (0, 1):
            other = 1 - fixed
            cand = np.empty_like(free)
            cand[:, fixed] = np.clip(free[:, fixed], lb[fixed], ub[fixed])
            rest = aty[:, other] - ata[:, other, fixed] * cand[:, fixed]
            cand[:, other] = np.clip(
                rest / np.maximum(ata[:, other, other], 1e-300), lb[other], ub[other]
            )
            c = cost(cand)
            better = ~inside & (c < best_cost)
            best = np.where(better[:, None], cand, best)
            best_cost = np.where(better, c, best_cost)
        return best, best_cost

    c2_bounds = None
    if kind != "Arrhenius":
        # WLF must stay finite over the temperatures it is used at.
        t_min = float(lo.min()) if split is None else max(float(lo.min()), split)
        c2_lo = max(5.0, wlf_ref - t_min + 1.0)
        c2_bounds = (np.log(c2_lo), np.log(2000.0))
    base_weight = weight.copy()
    c2 = None
    for robust_pass in range(ROBUST_PASSES):
        if c2_bounds is not None:
            # A coarse scan of log C2 (later passes: around the previous optimum), then
            # finer scans around the best point, down to about 0.4 % in C2.
            if robust_pass == 0:
                grid = np.linspace(*c2_bounds, 25)
            else:
                assert c2 is not None  # set by the previous pass
                g0 = np.log(c2)
                grid = np.linspace(max(g0 - 0.3, c2_bounds[0]), min(g0 + 0.3, c2_bounds[1]), 13)
            for _refine in range(2):
                _, costs = solve(np.exp(grid), weight)
                k = int(np.argmin(costs))
                a = grid[max(k - 1, 0)]
                b = grid[min(k + 1, grid.size - 1)]
                grid = np.linspace(a, b, 15)
            params, costs = solve(np.exp(grid), weight)
            k = int(np.argmin(costs))
            c2 = float(np.exp(grid[k]))
            lin = params[k]
        else:
            c2 = None
            lin = solve(None, weight)[0][0]
        # Soft-L1 reweighting (iteratively reweighted least squares): a pair far from
        # the law, such as one straddling the glass transition, counts less.
        r = (design(None if c2 is None else np.array([c2]))[0] @ lin - delta) * base_weight
        weight = base_weight / np.sqrt(np.sqrt(1.0 + r**2))
    if kind == "WLF":
        params = [lin[0], c2]
    elif kind == "Arrhenius":
        params = [lin[0]]
    else:
        params = [lin[0], c2, lin[1]]
    notes = []
    at_bound = np.isclose(lin, lb, rtol=1e-4) | np.isclose(lin, ub, rtol=1e-4)
    if c2 is not None:
        assert c2_bounds is not None  # C2 is fitted only where it has bounds
        at_bound = np.append(at_bound, np.isclose(np.log(c2), c2_bounds, atol=2e-3).any())
    if at_bound.any():
        notes.append("shift-law fit stopped at a parameter bound; treat its constants with care")
    law = _law_from_params(kind, params, reference, split, wlf_ref)
    model = law._raw(hi) - law._raw(lo)
    rms = float(np.sqrt(np.mean((model - delta) ** 2))) if delta.size else float("nan")
    return ShiftLaw(**{**law.to_dict(), "rms": rms, "notes": tuple(notes)})


def _best_law(pairs, reference, splits, glassy_without_transition) -> ShiftLaw:
    """The law over the candidate split temperatures that fits the pairwise shifts best.

    Candidates come in order of preference; a later one is taken only when its robust
    misfit is clearly lower (by more than 2, or 10 %), so that pairs left undetermined do
    not decide the split.
    """
    fitted, errors = [], []
    tried: list[float | None] = []
    good = [p for p in pairs if p.status == "ok"]
    lo = np.array([p.lower for p in good])
    hi = np.array([p.upper for p in good])
    delta = np.array([p.delta for p in good])
    sigma = np.maximum(np.array([p.sigma for p in good]), 0.005)
    for split in splits:
        # Candidates closer than 1 K to one already tried give the same law.
        if split is not None and any(t is not None and abs(t - split) < 1.0 for t in tried):
            continue
        tried.append(split)
        try:
            law = fit_shift_law(pairs, reference, split, glassy_without_transition)
        except FitError as exc:
            errors.append(exc)
            continue
        with np.errstate(invalid="ignore", over="ignore"):
            resid = (delta - (law.log_shift(hi) - law.log_shift(lo))) / sigma
            cost = float(np.sum(np.log1p(resid**2)))
        if np.isfinite(cost):  # a law that is not finite at the pairs' temperatures fails
            fitted.append((cost, law))
    if not fitted:
        if errors:
            raise errors[0]
        raise FitError(
            f"no shift law fitted to the isotherms is finite both there and at the reference "
            f"temperature {reference:g} degC (WLF diverges C2 below its reference): choose "
            "a reference nearer the measured temperatures"
        )
    best_cost = min(cost for cost, _ in fitted)
    tolerance = max(2.0, 0.1 * best_cost)
    return next(law for cost, law in fitted if cost <= best_cost + tolerance)


def shift_isotherms(
    isotherms: list[Isotherm],
    reference: float,
    split: float | None | list[float],
    glassy_without_transition: bool = False,
) -> ShiftResult:
    """Shift factors of all isotherms to ``reference`` and the law fitted to them.

    Pairwise shifts of neighbouring isotherms (:func:`pair_shift`) are summed from the
    reference isotherm outwards. A pair that does not overlap, or whose shift is
    ill-determined (flat curves), is bridged with the fitted shift law and flagged.
    ``split`` may be a list of candidate glass transitions (for instance Tg by several
    methods); the one whose WLF/Arrhenius law fits the pairwise shifts best is used.
    """
    splits: Sequence[float | None] = split if isinstance(split, list | tuple) else [split]
    splits = splits or [None]
    temps = np.array([iso.temperature for iso in isotherms])
    if temps.size < 2:
        law = ShiftLaw("none", reference, notes=("single isotherm: no superposition",))
        return ShiftResult(temps, np.zeros(1), np.zeros(1, bool), law, [], list(law.notes))
    pairs = [pair_shift(a, b) for a, b in zip(isotherms[:-1], isotherms[1:], strict=True)]
    notes = [
        f"isotherms {p.lower:g} and {p.upper:g} °C: {p.status}, bridged with the shift law"
        for p in pairs
        if p.status != "ok"
    ]
    law = _best_law(pairs, reference, splits, glassy_without_transition)
    steps = np.empty(len(pairs))
    bridged_step = np.zeros(len(pairs), bool)
    for i, p in enumerate(pairs):
        if p.status == "ok":
            steps[i] = p.delta
        else:
            steps[i] = float(law.log_shift(p.upper) - law.log_shift(p.lower))
            bridged_step[i] = True
    cumulative = np.concatenate([[0.0], np.cumsum(steps)])
    i_ref = int(np.argmin(np.abs(temps - reference)))
    # Anchor at the reference isotherm; if the reference is not an isotherm, use the law.
    offset = cumulative[i_ref] - float(law.log_shift(temps[i_ref]))
    log_shift = cumulative - offset
    bridged = np.zeros(temps.size, bool)
    bridged[1:] |= bridged_step
    return ShiftResult(temps, log_shift, bridged, law, pairs, notes)
