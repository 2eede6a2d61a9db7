"""What a ranking computes for each grade before its constraints and scores: window
properties, merit-index values and the mount check, all grades at once."""

from __future__ import annotations

import operator
from collections.abc import Mapping
from dataclasses import dataclass

import numpy as np

from engine.base.blocks import beside, in_blocks, per_block
from engine.base.errors import CriteriaError
from engine.base.fields import number_fields
from engine.curves.bank import CurveBank
from engine.curves.mountcheck import MountResult, check_mounts
from engine.curves.system import solve_systems
from engine.curves.window import WindowProps, check_window_size, evaluate_window
from engine.library.store import Material
from engine.physics.indices import IndexSpec, aggregate
from engine.selection.criteria import Criteria, IndexChoice

LOG_FLOOR = 1e-12  # values at or below zero are scored as this (a damping span of 0 K)
CATALOG_NUMBERS = tuple(f.name for f in number_fields())


class _Quantities(Mapping):
    """Named quantities of engine.physics.indices for the grades ``rows`` at the window grid or
    the duty points, each computed when an index first asks for it.

    Arrays have shape (grades, points), catalog columns (grades, 1); moduli in MPa (see
    engine.physics.indices).
    """

    def __init__(self, props: WindowProps, catalog: dict[str, np.ndarray], duty: bool, rows):
        if duty:
            assert props.duty_storage is not None and props.duty_loss is not None
            assert props.duty_temperatures is not None and props.duty_frequencies is not None
            storage, loss = props.duty_storage[rows], props.duty_loss[rows]
            temps, freqs = props.duty_temperatures, props.duty_frequencies
        else:
            storage, loss = props.storage[rows], props.loss[rows]
            storage, loss = storage.reshape(storage.shape[0], -1), loss.reshape(loss.shape[0], -1)
            tt, ff = np.meshgrid(props.temperatures, props.frequencies, indexing="ij")
            temps, freqs = tt.ravel(), ff.ravel()
        self.shape = storage.shape
        to_shear = props.to_shear[rows, None]
        self._make = {
            "loss_factor": lambda: loss / storage,
            "storage_modulus": lambda: storage * 1e-6,
            "loss_modulus": lambda: loss * 1e-6,
            "shear_modulus": lambda: storage * (to_shear * 1e-6),
            "density": lambda: catalog["density"][rows, None],
            "price": lambda: catalog["price"][rows, None],
            "hardness": lambda: catalog["hardness"][rows, None],
            "temperature": lambda: np.broadcast_to(temps, self.shape),
            "frequency": lambda: np.broadcast_to(freqs, self.shape),
        }
        self._made: dict[str, np.ndarray] = {}

    def __getitem__(self, name: str) -> np.ndarray:
        if name not in self._made:
            self._made[name] = self._make[name]()
        return self._made[name]

    def __iter__(self):
        return iter(self._make)

    def __len__(self) -> int:
        return len(self._make)


def _point_indices(
    props: WindowProps,
    catalog: dict[str, np.ndarray],
    choices: list[IndexChoice],
    specs: dict[str, IndexSpec],
) -> tuple[dict[str, np.ndarray], np.ndarray]:
    """Aggregated point indices of every grade and its worst loss factor on the grid.

    With duty points the point indices are taken at the duty points, else on the grid.
    Worked out in blocks of grades (engine.base.blocks), so that no quantity is ever held for
    the whole library at once.
    """
    n = len(props.ids)
    duty = props.duty_storage is not None
    values = {c.name: np.empty(n) for c in choices}
    eta_worst = np.empty(n)

    def work(a: int, b: int) -> None:
        rows = slice(a, b)
        q = _Quantities(props, catalog, duty, rows)
        with np.errstate(all="ignore"):
            for c in choices:
                spec = specs[c.name]
                assert spec.point is not None  # a point index gives its point values
                v = np.broadcast_to(np.asarray(spec.point(q), dtype=float), q.shape)
                values[c.name][rows] = aggregate(
                    v, c.aggregate, spec.higher_is_better, props.duty_share
                )
            grid = q if not duty else _Quantities(props, catalog, False, rows)
            eta_worst[rows] = grid["loss_factor"].min(axis=1)

    points = props.storage[0].size if n else 1
    in_blocks(n, work, per_block(points))
    return values, eta_worst


def _catalog_columns(materials: list[Material]) -> dict[str, np.ndarray]:
    """The numeric catalog fields of ``materials`` as arrays (NaN where unknown)."""
    rows = list(map(operator.attrgetter(*CATALOG_NUMBERS), materials))  # None -> NaN below
    table = np.array(rows, dtype=float).reshape(len(materials), len(CATALOG_NUMBERS))
    return dict(zip(CATALOG_NUMBERS, table.T, strict=True))


def _row_max(values: np.ndarray) -> np.ndarray:
    """Largest finite-or-infinite value of each row, NaN ignored (NaN if all are)."""
    return np.fmax.reduce(values.reshape(values.shape[0], -1), axis=1)


@dataclass
class Evaluation:
    """What a ranking computes for each grade before its constraints and scores.

    Arrays have one row per grade of ``ids``; index values in display units (see
    :class:`engine.physics.indices.IndexSpec`).
    """

    ids: list[str]
    catalog: dict[str, np.ndarray]  # numeric catalog fields, NaN where unknown
    props: WindowProps
    specs: dict[str, IndexSpec]
    values: dict[str, np.ndarray]  # aggregated index values
    eta_worst: np.ndarray  # worst loss factor over the window grid
    extrapolated: np.ndarray  # any window point (or duty point) leaves the data
    mount: MountResult | None
    system: list | None = None  # per grade: a SystemResult, or the reason it failed


def evaluate_grades(
    bank: CurveBank,
    materials: list[Material],
    criteria: Criteria,
    amplitude_sweeps: Mapping[str, np.ndarray] | None = None,
) -> Evaluation:
    """Window properties, index values and the mount check of every grade in ``bank``.

    ``materials`` are the catalog rows of the bank's grades, in its order (an id may
    appear more than once: only the catalog fields are read). Every figure of a grade
    depends on that grade alone. ``amplitude_sweeps`` (by bank id) carry the mount check
    to the design's working strain amplitude.
    """
    n = len(bank.ids)
    window = criteria.window
    catalog = _catalog_columns(materials)
    design = criteria.mount
    check_window_size(n, window)  # before the first array of the window is made
    # log10 aT at the window's temperatures, once for the window and the mount check.
    t = window.temperatures
    shift = bank.shift_rows(np.broadcast_to(t[None, :], (n, t.size)))
    # The mount check does not read the window's properties: it runs beside them.
    mount_check = None
    if design is not None:
        mount_check = beside(
            lambda: check_mounts(
                bank,
                design,
                t,
                catalog["poisson_ratio"],
                catalog["hardness"],
                bulk_modulus=catalog["bulk_modulus"],
                amplitude_sweeps=amplitude_sweeps,
                shift=shift,
            )
        )
    try:
        props = evaluate_window(bank, window, catalog["poisson_ratio"], shift=shift)
        specs = {c.name: c.spec() for c in criteria.indices}
        point = [c for c in criteria.indices if specs[c.name].kind == "point"]
        values, eta_worst = _point_indices(props, catalog, point, specs)
        whole = {
            "storage_modulus": props.storage.reshape(n, -1),
            "path_temperatures": props.path_temperatures,
            "path_storage": props.path_storage,
            "path_loss_factor": props.path_loss_factor,
            "eta_threshold": criteria.eta_threshold,
        }
        # The window indices that read the window alone, while the mount check ends.
        alone = [
            c
            for c in criteria.indices
            if specs[c.name].kind == "window"
            and not specs[c.name].needs_mount
            and not specs[c.name].needs_system
        ]
        _window_indices(alone, specs, whole, values)
    except BaseException:
        if mount_check is not None:
            mount_check.exception()  # the mount check ends before the error goes on
        raise
    mres = None if mount_check is None else mount_check.result()
    if mres is not None:
        whole["natural_frequency"] = mres.natural_frequency
        whole["transmissibility"] = mres.transmissibility
    systems = None
    if criteria.system is not None:
        systems = solve_systems(bank, catalog, criteria.system, window.temperatures)
        solved = [s if not isinstance(s, str) else None for s in systems]

        def figure(get) -> np.ndarray:
            return np.array([np.nan if s is None else get(s) for s in solved], dtype=float)

        whole["system_highest_mode"] = figure(lambda s: s.highest_mode)
        whole["system_worst_transmissibility"] = figure(lambda s: s.worst_transmissibility)
        whole["system_mode_drift"] = figure(lambda s: float(np.nanmax(s.mode_drift())))
    for c in criteria.indices:
        spec = specs[c.name]
        if spec.kind != "window":
            continue
        if spec.needs_mount and mres is None:
            raise CriteriaError(f"index '{c.name}' needs a mount design")
        if spec.needs_system and systems is None:
            raise CriteriaError(f"index '{c.name}' needs a mount system")
    rest = [c for c in criteria.indices if specs[c.name].kind == "window" and c not in alone]
    _window_indices(rest, specs, whole, values)
    extrap_any = np.asarray(props.extrapolated.reshape(n, -1).any(axis=1))
    if props.duty_extrapolated is not None:
        extrap_any |= props.duty_extrapolated.any(axis=1)
    return Evaluation(
        list(bank.ids), catalog, props, specs, values, eta_worst, extrap_any, mres, systems
    )


def _window_indices(chosen, specs, whole, values) -> None:
    """Values of the window indices ``chosen`` from the figures in ``whole``, into
    ``values``."""
    for c in chosen:
        spec = specs[c.name]
        if spec.window is None:
            raise CriteriaError(f"window index '{c.name}' has no evaluation")
        with np.errstate(invalid="ignore", divide="ignore"):
            values[c.name] = np.asarray(spec.window(whole), dtype=float)


def raw_scores(values: dict[str, np.ndarray], criteria: Criteria) -> np.ndarray:
    """Score before the 0-100 mapping: sum_i w_i s_i log10(v_i) / sum_i w_i (module notes).

    ``values`` maps each chosen index to its values (any shape, the same for all); a
    missing value or one at or below zero counts as LOG_FLOOR.
    """
    specs = {c.name: c.spec() for c in criteria.indices}
    total_w = sum(c.weight for c in criteria.indices)
    raw = sum(
        c.weight
        * (1 if specs[c.name].higher_is_better else -1)
        * np.log10(np.maximum(np.nan_to_num(values[c.name], nan=LOG_FLOOR), LOG_FLOOR))
        for c in criteria.indices
    )
    return np.asarray(raw, dtype=float) / total_w
