"""Tables of ranking results for display (values as the engine gives them)."""

from __future__ import annotations

import numpy as np
import pandas as pd

from engine.physics.mount import STANDARD_GRAVITY
from engine.selection.ranking import GradeResult, RankResult


def _span(values) -> str:
    v = np.asarray(values, dtype=float)
    v = v[np.isfinite(v)]
    if v.size == 0:
        return "not found"
    lo, hi = v.min(), v.max()
    return f"{lo:.3g}" if np.isclose(lo, hi) else f"{lo:.3g} to {hi:.3g}"


def _status(g: GradeResult, n_pass: int) -> str:
    return f"rank {g.rank} of {n_pass}" if g.passed else "excluded"


def index_columns(result: RankResult) -> dict[str, str]:
    """Index name -> column title in words with its unit, e.g. ``"loss factor, worst in
    the window [-]"`` (a point index says how it is taken over the window)."""
    how = {c.name: c.aggregate for c in result.criteria.indices}
    out = {}
    for name, spec in result.specs.items():
        unit = f" [{spec.unit or '-'}]"
        taken = f", {how[name]} in the window" if spec.kind == "point" and name in how else ""
        out[name] = f"{spec.label}{taken}{unit}"
    return out


# The key figures of the shortlist table, first so that they are on screen at once.
SHORTLIST_KEY = (
    "rank",
    "grade",
    "score",
    "fn [Hz]",
    "worst transmissibility",
    "long-term sag [mm]",
    "reason",
)


def comparison_frame(result: RankResult, ids: list[str]) -> pd.DataFrame:
    """Key figures of the grades in the comparison set."""
    props = result.window_props
    rows_of = {gid: k for k, gid in enumerate(props.ids)}
    grades = {g.id: g for g in result.grades}
    n_pass = len(result.shortlist)
    titles = index_columns(result)
    rows = []
    for gid in ids:
        if gid not in grades or gid not in rows_of:
            continue
        g, k = grades[gid], rows_of[gid]
        row = {
            "grade": gid,
            "name": g.name,
            "supplier": g.supplier,
            "status": _status(g, n_pass),
            "score": g.score,
            "E' in window [MPa]": _span(props.storage[k] / 1e6),
            "worst loss factor in window": g.worst_loss_factor,
        }
        for name, title in titles.items():
            row[title] = g.indices.get(name)
        if g.mount is not None:
            row["fn [Hz]"] = _span(g.mount["natural_frequency_Hz"])
            row["worst transmissibility"] = float(np.nanmax(g.mount["transmissibility"]))
            row["pad area [mm²]"] = g.mount["area_mm2"]
        row["price [per kg]"] = g.price
        row["extrapolated"] = g.extrapolated
        rows.append(row)
    return pd.DataFrame(rows)


def shortlist_frame(result: RankResult) -> pd.DataFrame:
    """The ranked grades with score, index values and the one-line reason.

    ``rank interval`` is best–worst rank over the draws of the fits (engine.selection.spread),
    None where it was not computed.
    """
    titles = index_columns(result)
    rows = []
    for g in result.shortlist:
        interval = g.rank_interval
        m = g.mount
        row = {
            "rank": g.rank,
            "grade": g.id,
            "score": g.score,
            "fn [Hz]": None if m is None else _span(m["natural_frequency_Hz"]),
            "worst transmissibility": (
                None if m is None else float(np.nanmax(m["transmissibility"]))
            ),
            "long-term sag [mm]": None if m is None else m["sag_mm"],
            "reason": g.reason,
            "rank interval": None if interval is None else "{}–{}".format(*interval),
            "name": g.name,
            "supplier": g.supplier,
            "family": g.family,
            "price [per kg]": g.price,
        }
        for name, title in titles.items():
            if name == "worst_transmissibility" and m is not None:
                continue  # a key figure already
            row[title] = g.indices.get(name)
        row["on the Pareto front"] = g.pareto
        row["extrapolated"] = g.extrapolated
        rows.append(row)
    frame = pd.DataFrame(rows)
    if not frame.empty and frame["fn [Hz]"].isna().all():  # no mount checked
        frame = frame.drop(columns=["fn [Hz]", "worst transmissibility", "long-term sag [mm]"])
    return frame


def mount_frame(result: RankResult, ids: list[str]) -> pd.DataFrame:
    """Sized pad, the mount's key figures and its verdict, one row per grade.

    The verdict's reasons and the notes are not repeated here: the Mount page gives them
    once, beside each grade's verdict.
    """
    grades = {g.id: g for g in result.grades}
    n_pass = len(result.shortlist)
    own_limit = result.criteria.constraints.max_static_strain
    design = result.criteria.mount
    load = None if design is None else design.mass_per_pad * STANDARD_GRAVITY
    rows = []
    for gid in ids:
        g = grades.get(gid)
        if g is None or g.mount is None:
            continue
        m = g.mount
        ratio = m["dynamic_to_static_ratio"]
        rows.append(
            {
                "grade": gid,
                "mount verdict": m["verdict"],
                "status": _status(g, n_pass),
                "pad area [mm²]": m["area_mm2"],
                "shape factor": m["shape_factor"],
                "k factor": m["k_factor"],
                "fn [Hz]": _span(m["natural_frequency_Hz"]),
                "worst transmissibility": float(np.nanmax(m["transmissibility"])),
                "peak amplification at resonance": float(
                    np.nanmax(m["amplification_at_resonance"])
                ),
                "dynamic-to-static ratio": None if ratio is None else _span(ratio),
                "static deflection [mm]": _span(m["static_deflection_mm"]),
                "largest static strain": float(np.nanmax(m["static_strain"])),
                "long-term sag [mm]": m["sag_mm"],
                "sag strain": m["sag_strain"],
                "strain limit": m["strain_limit"] if own_limit is None else own_limit,
                "load per pad [N]": load,
                "buckling load per pad [N]": m["critical_load_N"],
            }
        )
    return pd.DataFrame(rows)
