"""Constraints: every limit a grade must meet, each one registered check.

A check reads the evaluation of all grades at once and reports the grades that fail
with :meth:`Checks.fail`; a :class:`Failure` is made only for those. Checks run in the
order they are registered, so each grade's failures come in a fixed order. A new
constraint is a field of :class:`engine.selection.criteria.Constraints` (None switches
it off) and one function here decorated with :func:`constraint`.
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass

import numpy as np

from engine.curves.mountcheck import CHECK_WORDS, MountResult
from engine.selection.criteria import Criteria
from engine.selection.evaluation import Evaluation
from engine.selection.results import DeferredFailure, Failure, short_number

MOUNT_EXTRAPOLATION = "the mount check leaves the measured data"
STIFF_RATIO = 0.5  # f/fn below this: T is within a third of 1, no resonance (common practice)


@dataclass
class Checks:
    """What a check reads (the criteria and the evaluation) and where it writes."""

    criteria: Criteria
    ev: Evaluation
    out: list[list[Failure]]
    # Grades whose pad is too stiff for its size or cannot carry the load: the other
    # mount checks say nothing of them (their figures follow from an unusable pad).
    unusable_pad: np.ndarray | None = None

    @property
    def mres(self) -> MountResult:
        """The mount check (only mount checks read it, and they run only with one)."""
        assert self.ev.mount is not None
        return self.ev.mount

    def fail(self, mask, make: Callable[[int], Failure], topic: str = "window") -> None:
        """Add ``make(k)`` to the failures of every grade k where ``mask`` is true."""
        if topic == "mount" and self.unusable_pad is not None:
            mask = np.asarray(mask, dtype=bool) & ~self.unusable_pad
        for k in np.flatnonzero(mask).tolist():
            failure = make(k)
            failure.topic = topic
            self.out[k].append(failure)


Check = Callable[[Checks], None]
CHECKS: list[tuple[str, Check]] = []


def constraint(name: str, needs_mount: bool = False) -> Callable[[Check], Check]:
    """Register a check under ``name``; a mount check runs only with a mount design."""

    def register(check: Check) -> Check:
        def run(c: Checks) -> None:
            if not needs_mount or c.ev.mount is not None:
                check(c)

        CHECKS.append((name, run))
        return check

    return register


def failures(criteria: Criteria, ev: Evaluation) -> list[list[Failure]]:
    """Every failed constraint of every grade of ``ev``, in registration order."""
    checks = Checks(criteria, ev, [[] for _ in ev.ids])
    for _, check in CHECKS:
        check(checks)
    return checks.out


def _row_max(values: np.ndarray) -> np.ndarray:
    """Largest finite-or-infinite value of each row, NaN ignored (NaN if all are)."""
    return np.fmax.reduce(values.reshape(values.shape[0], -1), axis=1)


@constraint("service_covers_window")
def _service_range(c: Checks) -> None:
    if not c.criteria.constraints.service_covers_window:
        return
    lo_t, hi_t = c.criteria.window.temp_range
    smin, smax = c.ev.catalog["service_min"], c.ev.catalog["service_max"]
    unknown = np.isnan(smin) | np.isnan(smax)
    needs = f"to cover {lo_t:g} to {hi_t:g} °C"
    with np.errstate(invalid="ignore"):
        short = ~unknown & ((smin > lo_t) | (smax < hi_t))
    c.fail(unknown, lambda k: Failure("service range", "unknown", needs), "catalog")
    c.fail(
        short,
        lambda k: Failure("service range", f"{smin[k]:g} to {smax[k]:g} °C", needs),
        "catalog",
    )


def _catalog_limit(c: Checks, field: str, label: str, unit: str, limit: str, outside) -> None:
    """Failures of a catalog field: unknown, or ``outside(values)`` true."""
    v = c.ev.catalog[field]
    c.fail(np.isnan(v), lambda k: Failure(label, "unknown", limit), "catalog")
    with np.errstate(invalid="ignore"):
        bad = outside(v)
    c.fail(bad, lambda k: Failure(label, f"{v[k]:g} {unit}", limit), "catalog")


@constraint("hardness_range")
def _hardness(c: Checks) -> None:
    if c.criteria.constraints.hardness_range is None:
        return
    a, b = c.criteria.constraints.hardness_range
    _catalog_limit(
        c, "hardness", "hardness", "Shore A", f"{a:g}-{b:g} Shore A", lambda h: (h < a) | (h > b)
    )


@constraint("max_price")
def _price(c: Checks) -> None:
    top = c.criteria.constraints.max_price
    if top is None:
        return
    _catalog_limit(c, "price", "price", "per kg", f"<= {top:g} per kg", lambda p: p > top)


@constraint("min_loss_factor")
def _loss_factor(c: Checks) -> None:
    least = c.criteria.constraints.min_loss_factor
    if least is None:
        return
    eta = c.ev.eta_worst
    c.fail(
        eta < least,
        lambda k: Failure("worst-case loss factor", short_number(eta[k]), f">= {least:g}"),
    )


@constraint("allow_extrapolation")
def _window_extrapolation(c: Checks) -> None:
    if c.criteria.constraints.allow_extrapolation:
        return
    c.fail(
        c.ev.extrapolated,
        lambda k: Failure(
            "extrapolation", "the window reaches beyond the measured data (not allowed)", ""
        ),
    )


@constraint("indices")
def _index_known(c: Checks) -> None:
    catalog = c.ev.catalog
    for name, spec in c.ev.specs.items():
        missing = np.zeros(len(c.ev.ids), dtype=bool)
        for field_name in spec.needs:
            missing |= np.isnan(catalog[field_name])

        def unknown_index(k, name=name, spec=spec):
            absent = [f for f in spec.needs if np.isnan(catalog[f][k])]
            return Failure(f"index {name}", "unknown", "needs " + (", ".join(absent) or "data"))

        c.fail(missing | ~np.isfinite(c.ev.values[name]), unknown_index)


# The verdict's own checks of the pad, reported in its plain words; the limits a user
# sets (transmissibility, f/fn, amplification, static strain) are constraints of their own.
_PAD_CHECKS = ("too_stiff", "cannot_carry", "too_soft", "stress", "buckling")


@constraint("mount_pad", needs_mount=True)
def _pad(c: Checks) -> None:
    mres = c.mres
    failing = mres.failing

    def plain(name: str) -> Callable[[int], Failure]:
        return lambda k: DeferredFailure(lambda: mres.reason(name, k), "", "", CHECK_WORDS[name])

    for name in _PAD_CHECKS:
        c.fail(failing[name], plain(name), "mount")
    c.unusable_pad = failing["too_stiff"] | failing["cannot_carry"]


@constraint("natural_frequency", needs_mount=True)
def _root_found(c: Checks) -> None:
    found = np.isfinite(c.mres.natural_frequency)
    c.fail(
        ~found.all(axis=1),
        lambda k: Failure("natural frequency", "not found", "a root in 1 mHz-100 kHz"),
        "mount",
    )


@constraint("fn_range_Hz", needs_mount=True)
def _fn_range(c: Checks) -> None:
    if c.criteria.constraints.fn_range_Hz is None:
        return
    a, b = c.criteria.constraints.fn_range_Hz
    fn = c.mres.natural_frequency
    found = np.isfinite(fn)
    fn_lo = np.where(found, fn, np.inf).min(axis=1)
    fn_hi = np.where(found, fn, -np.inf).max(axis=1)
    c.fail(
        found.any(axis=1) & ((fn_lo < a) | (fn_hi > b)),
        lambda k: Failure(
            "natural frequency", f"{fn_lo[k]:.3g} to {fn_hi[k]:.3g} Hz", f"{a:g} to {b:g} Hz"
        ),
        "mount",
    )


def _worst_place(
    c: Checks, values: np.ndarray, largest: bool
) -> tuple[np.ndarray, Callable[[int], str]]:
    """Each grade's worst value over its temperatures (and disturbances, for values of
    shape (grades, temperatures, disturbances)) and, for a grade k, where it is as an
    "at <T> °C[, <f> Hz]" text (written for the failing grades only); NaN entries are
    passed over."""
    n = values.shape[0]
    flat = values.reshape(n, -1)
    clean = np.where(np.isnan(flat), -np.inf if largest else np.inf, flat)
    at = clean.argmax(axis=1) if largest else clean.argmin(axis=1)
    worst = clean[np.arange(n), at]
    temps = c.mres.temperatures
    place = np.unravel_index(at, values.shape[1:])
    if values.ndim == 2:
        return worst, lambda k: f"at {temps[place[0][k]]:g} °C"
    assert c.criteria.mount is not None  # mount checks run only with a mount design
    labels = c.criteria.mount.disturbance_labels()
    return worst, lambda k: f"at {temps[place[0][k]]:g} °C, {labels[place[1][k]]}"


@constraint("frequency_ratio", needs_mount=True)
def _frequency_ratio(c: Checks) -> None:
    least = c.criteria.constraints.min_frequency_ratio
    if least is None:
        return
    dist = c.mres.disturbance
    with np.errstate(divide="ignore", invalid="ignore"):
        ratio = dist[None, None, :] / c.mres.natural_frequency[:, :, None]
    worst, where = _worst_place(c, ratio, largest=False)
    c.fail(
        np.isfinite(worst) & (worst < least),
        lambda k: Failure(
            # Well below resonance the pad is simply too stiff: it passes the force on.
            "near resonance" if worst[k] >= STIFF_RATIO else "too stiff to isolate",
            f"{where(k)} (f/fn = {worst[k]:.2g})",
            f"f/fn >= {least:.3g} at every temperature",
        ),
        "mount",
    )


@constraint("max_transmissibility", needs_mount=True)
def _transmissibility(c: Checks) -> None:
    top = c.criteria.constraints.transmissibility_limit
    if top is None:
        return
    worst, where = _worst_place(c, c.mres.transmissibility, largest=True)
    with np.errstate(invalid="ignore"):
        high = worst > top
    efficiency = c.criteria.constraints.min_isolation_efficiency
    needs = f"< {top:g} at every temperature" + (
        f" (isolation efficiency >= {efficiency:.0%})"
        if efficiency is not None and top == 1.0 - efficiency
        else ""
    )
    c.fail(
        high & np.isfinite(worst),
        lambda k: Failure(
            "amplifies the disturbance" if worst[k] >= 1.0 else "transmissibility",
            f"T = {short_number(worst[k])} {where(k)}",
            needs,
        ),
        "mount",
    )


@constraint("max_amplification", needs_mount=True)
def _amplification(c: Checks) -> None:
    top = c.criteria.constraints.max_amplification
    if top is None:
        return
    worst, where = _worst_place(c, c.mres.amplification, largest=True)
    c.fail(
        np.isfinite(worst) & (worst > top),
        lambda k: Failure(
            "amplification passing through resonance",
            f"{short_number(worst[k])} {where(k)}",
            f"<= {top:g}",
        ),
        "mount",
    )


@constraint("max_static_strain", needs_mount=True)
def _static_strain(c: Checks) -> None:
    mres = c.mres
    chosen = c.criteria.constraints.max_static_strain
    limit = chosen if chosen is not None else mres.strain_limit
    static = _row_max(mres.static_strain)
    strain = np.where(np.isnan(static), np.nan, np.fmax(static, mres.sag_strain))
    with np.errstate(invalid="ignore"):
        strained = ~(strain <= limit)

    def strain_failure(k):
        if np.isnan(strain[k]):
            return Failure("static strain", "unknown", f"<= {limit:g}")
        return DeferredFailure(
            lambda: mres.strain_text(k, limit), "", f"<= {limit:g}", "static strain"
        )

    c.fail(strained, strain_failure, "mount")


@constraint("mount_extrapolation", needs_mount=True)
def _mount_extrapolation(c: Checks) -> None:
    if c.criteria.constraints.allow_extrapolation:
        return
    # Reported once: a window that already needs extrapolation says so above.
    c.fail(
        c.mres.extrapolated.any(axis=1) & ~c.ev.extrapolated,
        lambda k: Failure("extrapolation", f"{MOUNT_EXTRAPOLATION} (not allowed)", ""),
        "mount",
    )


@constraint("mount_system")
def _mount_system(c: Checks) -> None:
    """The mount system's verdict (six degrees of freedom): every mode at least the
    case's frequency ratio below each disturbance, no transmissibility of 1 or more, and
    no extrapolated modulus unless allowed; each failure in plain words."""
    systems = c.ev.system
    if systems is None:
        return
    allow = c.criteria.constraints.allow_extrapolation
    reasons: list[list[str]] = []
    for s in systems:
        if isinstance(s, str):
            reasons.append([s])
            continue
        found = s.failures()
        if not allow and s.extrapolated.any() and not found:
            found = ["mount system: the moduli it needs leave the measured data (not allowed)"]
        reasons.append(found)

    def plain(text: str) -> Callable[[int], Failure]:
        return lambda k: Failure(text, "", "", kind="mount system")

    for k, texts in enumerate(reasons):
        only = np.zeros(len(reasons), dtype=bool)
        only[k] = True
        for text in texts:
            c.fail(only, plain(text), "mount")
