"""Tests of engine.selection.ranking: criteria files, constraints, scores, order and Pareto flags.

The grades are cheap variants of one master curve fitted once to the known model of
:mod:`tests.synthetic`: the Prony weights are scaled (a stiffer or softer compound) and
the shift law is moved along the temperature axis (a higher or lower glass transition),
so that variant(T + dT, f) = scale x base(T, f) exactly. Catalog fields (density, price,
hardness, service range) vary freely. The properties checked are those the ranking
module promises in its docstring: scores are weighted sums of log10 index values, so
adding a grade never reorders the others and raising a weight never lowers the grade
that is best on that index; ties fall to the first index, then price, then id.
Index values are checked against the master curve evaluated directly (the Prony
series, Ferry 1980) and against numpy.
"""

from __future__ import annotations

import json
import math
import random
import re
from types import SimpleNamespace

import numpy as np
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from engine.base.errors import CriteriaError
from engine.curves.mastercurve import MasterCurve, build_master_curve
from engine.curves.mountcheck import MountDesign, default_mount
from engine.curves.window import DutyPoint, OperatingWindow
from engine.selection.ranking import Constraints, Criteria, IndexChoice, rank
from tests import synthetic
from tests.helpers import flat_bank, material

BASE = build_master_curve(synthetic.sweep(), "tensile")


def variant(scale: float, dt: float, mode: str = "tensile") -> MasterCurve:
    """BASE with moduli x ``scale`` and the shift law moved by ``dt`` [K]."""
    d = BASE.to_dict()
    d["mode"] = mode
    d["prony"]["weights_Pa"] = [w * scale for w in d["prony"]["weights_Pa"]]
    d["prony"]["equilibrium_Pa"] *= scale
    law = d["shift"]["law"]
    for key in ("reference_C", "wlf_reference_C", "split_C"):
        law[key] += dt
    d["shift"]["temperatures_C"] = [t + dt for t in d["shift"]["temperatures_C"]]
    d["reference_C"] += dt
    d["temperature_range"] = [t + dt for t in d["temperature_range"]]
    return MasterCurve.from_dict(d)


VARIANTS = [
    variant(s, dt)
    for s, dt in [(1, 0), (0.5, -20), (2, 15), (1, 30), (0.25, 0), (1, -40), (4, -10), (0.7, 10)]
]
WINDOW = OperatingWindow(
    temp_range=(-20.0, 45.0), temp_step=5.0, freq_range=(10.0, 100.0), freq_points=7
)
OPEN = Constraints(allow_extrapolation=True)
POOL = [
    "loss_factor",
    "loss_modulus",
    "beam_damping",
    "plate_damping_per_cost",
    "stiffness_drift",
    "damping_span",
]  # material indices: the mount's own are checked with a mount below
FEW = settings(max_examples=30, deadline=None, suppress_health_check=[HealthCheck.too_slow])


def run(grades, criteria):
    """Rank grades given as (id, variant index, density, price)."""
    curves = {g[0]: VARIANTS[g[1]] for g in grades}
    mats = {g[0]: material(g[0], density=g[2], price=g[3]) for g in grades}
    return rank(curves, mats, criteria)


def order(result):
    return [g.id for g in result.shortlist]


def test_variants_are_exact_shifts_of_the_base():
    # The construction the property tests rely on: E'_v(T + dT, f) = scale E'_base(T, f).
    v = variant(2.0, 15.0)
    t, f = np.array([-10.0, 10.0, 40.0]), np.array([3.0, 30.0, 300.0])
    p1, p0 = v.evaluate(t + 15.0, f), BASE.evaluate(t, f)
    np.testing.assert_allclose(p1.storage_modulus, 2.0 * p0.storage_modulus, rtol=1e-12)
    np.testing.assert_allclose(p1.loss_factor, p0.loss_factor, rtol=1e-12)


# ------------------------------------------------------------------ strategies


@st.composite
def scenarios(draw, min_indices=1):
    n = draw(st.integers(2, 6))
    grades = [
        (
            f"G{k:02d}",
            draw(st.integers(0, len(VARIANTS) - 1)),
            draw(st.floats(800.0, 2000.0)),
            draw(st.floats(1.0, 30.0)),
        )
        for k in range(n)
    ]
    names = draw(st.lists(st.sampled_from(POOL), min_size=min_indices, max_size=3, unique=True))
    choices = tuple(
        IndexChoice(
            name,
            draw(st.floats(0.1, 10.0)),
            draw(st.sampled_from(["worst", "mean", "best"])),
        )
        for name in names
    )
    return grades, choices


def criteria_of(choices, **kw):
    # Material screening (no mount): these properties are of the scores alone.
    return Criteria(window=WINDOW, indices=choices, constraints=OPEN, screening_only=True, **kw)


# ------------------------------------------------------------------ properties


@FEW
@given(scenarios(), st.data())
def test_adding_a_dominated_grade_keeps_the_order(scenario, data):
    grades, choices = scenario
    criteria = criteria_of(choices)
    before = run(grades, criteria)
    assert len(before.shortlist) == len(grades)
    # A copy of one grade that is heavier and dearer: worse or equal on every index.
    parent = data.draw(st.sampled_from(grades))
    heavier = data.draw(st.floats(1.0, 3.0))
    dearer = data.draw(st.floats(1.0, 3.0))
    extra = ("ZZ-NEW", parent[1], parent[2] * heavier, parent[3] * dearer)
    after = run([*grades, extra], criteria)
    assert [i for i in order(after) if i != "ZZ-NEW"] == order(before)
    assert order(after).index("ZZ-NEW") > order(after).index(parent[0])


@FEW
@given(scenarios(), st.data())
def test_raising_a_weight_never_lowers_the_best_grade_on_that_index(scenario, data):
    grades, choices = scenario
    before = run(grades, criteria_of(choices))
    k = data.draw(st.integers(0, len(choices) - 1))
    factor = data.draw(st.floats(1.5, 20.0))
    raised = tuple(
        IndexChoice(c.name, c.weight * factor if i == k else c.weight, c.aggregate)
        for i, c in enumerate(choices)
    )
    after = run(grades, criteria_of(raised))
    name = choices[k].name
    spec = before.specs[name]
    vals = [g.indices[name] for g in before.shortlist]
    best = max(vals) if spec.higher_is_better else min(vals)
    rank_after = {g.id: g.rank for g in after.shortlist}
    # Grades equal on the index to rounding (exact shifts of one curve) are a tie that
    # last-digit differences may order either way: the property is for a clear best.
    near = [g for g in before.shortlist if math.isclose(g.indices[name], best, rel_tol=1e-9)]
    if len(near) == 1:
        assert rank_after[near[0].id] <= near[0].rank


@FEW
@given(scenarios())
def test_ranking_is_deterministic_and_ordered_by_the_stated_keys(scenario):
    grades, choices = scenario
    criteria = criteria_of(choices)
    first = run(grades, criteria)
    shuffled = list(grades)
    random.Random(len(grades)).shuffle(shuffled)
    again = run(shuffled, criteria)
    assert order(first) == order(again)
    assert [g.raw_score for g in first.shortlist] == [
        next(h.raw_score for h in again.shortlist if h.id == g.id) for g in first.shortlist
    ]
    # Score: weighted mean of signed log10 index values (ranking module docstring).
    total = sum(c.weight for c in choices)
    for g in first.shortlist:
        expected = (
            sum(
                c.weight
                * (1 if first.specs[c.name].higher_is_better else -1)
                * math.log10(max(g.indices[c.name], 1e-12))
                for c in choices
            )
            / total
        )
        assert g.raw_score == pytest.approx(expected, rel=1e-12, abs=1e-12)
    # Order: score, then the first index (better first), then price, then id.
    lead = choices[0].name
    sign = 1 if first.specs[lead].higher_is_better else -1
    for a, b in zip(first.shortlist, first.shortlist[1:], strict=False):
        assert b.rank == a.rank + 1
        assert a.raw_score >= b.raw_score
        if a.raw_score == b.raw_score:
            va, vb = sign * a.indices[lead], sign * b.indices[lead]
            assert va >= vb
            if va == vb:
                assert a.price <= b.price
                if a.price == b.price:
                    assert a.id < b.id
    # Display score: 0-100 over the passing grades (best 100, worst 0; 100 for all when
    # every score ties). Exactness at the ends is checked in test_scores_stay_within_0_100.
    scores = [g.score for g in first.shortlist]
    assert max(scores) == pytest.approx(100.0, rel=1e-12)
    all_tie = len({g.raw_score for g in first.shortlist}) == 1
    assert min(scores) == pytest.approx(100.0 if all_tie else 0.0, abs=1e-12)


@FEW
@given(scenarios(min_indices=2))
def test_pareto_flags(scenario):
    grades, choices = scenario
    a, b = choices[0].name, choices[1].name
    result = run(grades, criteria_of(choices, pareto=(a, b)))
    sa = 1 if result.specs[a].higher_is_better else -1
    sb = 1 if result.specs[b].higher_is_better else -1
    pts = [(g.id, sa * g.indices[a], sb * g.indices[b]) for g in result.shortlist]
    for gid, x, y in pts:
        dominated = any(
            (x2 >= x and y2 >= y and (x2 > x or y2 > y)) for other, x2, y2 in pts if other != gid
        )
        flag = next(g.pareto for g in result.shortlist if g.id == gid)
        assert flag is (not dominated), gid
    assert any(g.pareto for g in result.shortlist)


# ------------------------------------------------------------------ tie-breaks


def test_ties_fall_to_first_index_then_price_then_id():
    # The first index carries no weight, so every score ties (same curve, same drift):
    # order by beam damping (lighter first), then price, then id.
    grades = [
        ("A-HEAVY", 0, 1500.0, 1.0),
        ("D-SAME", 0, 1000.0, 2.0),
        ("C-DEAR", 0, 1000.0, 9.0),
        ("B-CHEAP", 0, 1000.0, 2.0),
        ("E-LIGHT", 0, 900.0, 50.0),
    ]
    choices = (IndexChoice("beam_damping", 0.0), IndexChoice("stiffness_drift", 1.0))
    result = run(grades, criteria_of(choices))
    assert order(result) == ["E-LIGHT", "B-CHEAP", "D-SAME", "C-DEAR", "A-HEAVY"]
    assert len({g.raw_score for g in result.shortlist}) == 1
    assert all(g.score == 100.0 for g in result.shortlist)
    assert result.shortlist[0].reason.startswith("rank 1 of 5: ")


def test_score_beats_every_tie_break():
    # A better score wins even against a cheaper grade with an earlier id.
    grades = [("A-FIRST", 4, 1000.0, 1.0), ("Z-LAST", 0, 1000.0, 99.0)]
    choices = (IndexChoice("loss_modulus", 1.0, "mean"),)
    result = run(grades, criteria_of(choices))
    # The stiffer grade (variant 0 = 4 x variant 4) has four times the loss modulus.
    assert order(result) == ["Z-LAST", "A-FIRST"]
    lm = {g.id: g.indices["loss_modulus"] for g in result.shortlist}
    assert lm["Z-LAST"] == pytest.approx(4.0 * lm["A-FIRST"], rel=1e-9)


def test_scores_stay_within_0_100():
    # Pairs of frequency-independent grades of known loss factor. In IEEE arithmetic
    # (100 x)/x differs from 100 for roughly one x in eight, so among 105 pairs some
    # expose the rounding whatever the platform's log10 and power round to.
    etas = np.geomspace(0.02, 0.5, 15)
    bad = []
    for i, e1 in enumerate(etas):
        for e2 in etas[:i]:
            bank = flat_bank([1e6, 1e6], [e1, e2], "tensile", ids=["A", "B"])
            curves = {i: SimpleNamespace(notes=[]) for i in bank.ids}
            mats = {i: material(i) for i in bank.ids}
            result = rank(curves, mats, criteria_of((IndexChoice("loss_factor"),)), bank=bank)
            top, bottom = result.shortlist
            if not (top.score == 100.0 and bottom.score == 0.0):
                bad.append((e1, e2, top.score, bottom.score))
    assert bad == []


# ------------------------------------------------------------------ index values


def test_index_values_match_direct_evaluation():
    # Reference: MasterCurve.evaluate (the Prony series, Ferry 1980) on the same window;
    # the stacked table interpolates on a 0.05-decade grid (well under 0.5 % error).
    shear = variant(0.5, -20.0, mode="shear")
    curves = {"T": VARIANTS[0], "S": shear}
    mats = {"T": material("T", 1200.0, 4.0), "S": material("S", 1000.0, 8.0, mode="shear")}
    duty = (DutyPoint(-10.0, 20.0, 1.0), DutyPoint(20.0, 50.0, 3.0))
    window = OperatingWindow(
        temp_range=(-20.0, 40.0), temp_step=10.0, freq_range=(10.0, 100.0), duty_points=duty
    )
    choices = (
        IndexChoice("loss_factor", 1.0, "weighted"),
        IndexChoice("loss_modulus", 1.0, "weighted"),
        IndexChoice("frequency_drift"),
        IndexChoice("stiffness_drift"),
        IndexChoice("damping_span"),
    )
    criteria = Criteria(window=window, indices=choices, constraints=OPEN, mount=MountDesign())
    result = rank(curves, mats, criteria)
    share = np.array([0.25, 0.75])
    dt, df = np.array([-10.0, 20.0]), np.array([20.0, 50.0])
    by_id = {g.id: g for g in result.grades}
    for gid, to_e in (("T", 1.0), ("S", 3.0)):  # E = 3 G for nu = 0.5 (Timoshenko 1970)
        curve, got = curves[gid], by_id[gid].indices
        duty_p = curve.evaluate(dt, df)
        assert got["loss_factor"] == pytest.approx(duty_p.loss_factor @ share, rel=5e-3)
        expected_lm = (duty_p.loss_modulus * to_e / 1e6) @ share  # [MPa]
        assert got["loss_modulus"] == pytest.approx(expected_lm, rel=5e-3)
        # The mount's own drift: its fn at each window temperature (common practice).
        fn = result.mount.natural_frequency[result.mount.ids.index(gid)]
        assert got["frequency_drift"] == pytest.approx(fn.max() / fn.min(), rel=1e-9)
        path = np.arange(-20.0, 40.5, 1.0)
        e_path = curve.evaluate(path, window.design_frequency).storage_modulus
        assert got["stiffness_drift"] == pytest.approx(e_path.max() / e_path.min(), rel=5e-3)
        # fn = (1/2 pi) sqrt(k'(fn)/m) with k' ~ E' (common practice): the drift of fn is
        # the square root of the stiffness ratio at the two roots themselves.
        hot, cold = int(np.argmin(fn)), int(np.argmax(fn))
        e_at = curve.evaluate(window.temperatures[[cold, hot]], fn[[cold, hot]]).storage_modulus
        # The pad: Ec = E'(1 + 2kS^2) in series with the bulk modulus, 1/Ec,eff = 1/Ec + 1/K
        # (Gent & Lindley 1959).
        i = result.mount.ids.index(gid)
        ec = e_at * to_e * (1 + 2 * result.mount.k_factor[i] * result.mount.shape_factor[i] ** 2)
        bulk = result.mount.bulk_modulus[i]
        k_eff = ec / (1 + ec / bulk) if np.isfinite(bulk) else ec
        assert got["frequency_drift"] == pytest.approx(np.sqrt(k_eff[0] / k_eff[1]), rel=5e-3)
        eta = curve.evaluate(path, window.design_frequency).loss_factor
        assert got["damping_span"] == pytest.approx(np.sum(eta >= 0.2) * 1.0, abs=1.0)


# ------------------------------------------------------------------ constraints


def test_excluded_grades_keep_every_failed_constraint():
    window = WINDOW
    curves = {k: VARIANTS[0] for k in ("OK", "SERV", "HARD", "PRICEY", "NOPRICE", "MULTI")}
    curves["LOWETA"] = VARIANTS[3]
    mats = {
        "OK": material("OK"),
        "SERV": material("SERV", service=(-10.0, 150.0)),
        "HARD": material("HARD", hardness=90.0),
        "PRICEY": material("PRICEY", price=50.0),
        "NOPRICE": material("NOPRICE", price=None),
        "LOWETA": material("LOWETA"),
        "MULTI": material("MULTI", price=80.0, hardness=20.0, service=(-50.0, 30.0)),
    }
    # Worst-case loss factors from the master curves directly.
    t, f = window.temperatures[:, None], window.frequencies[None, :]
    eta_ok = VARIANTS[0].evaluate(t, f).loss_factor.min()
    eta_low = VARIANTS[3].evaluate(t, f).loss_factor.min()
    limit = float(np.sqrt(eta_ok * eta_low))
    assert eta_low < limit < eta_ok
    cons = Constraints(
        hardness_range=(40.0, 70.0), max_price=20.0, min_loss_factor=limit, allow_extrapolation=True
    )
    result = rank(curves, mats, Criteria(window=window, constraints=cons, screening_only=True))
    assert [g.id for g in result.shortlist] == ["OK"]
    excluded = {g.id: g for g in result.excluded}
    assert [g.id for g in result.excluded] == sorted(excluded)  # excluded follow, by id
    assert [g.id for g in result.grades] == ["OK", *sorted(excluded)]

    def failures(gid):
        return {f.constraint: f for f in excluded[gid].failures}

    assert failures("SERV")["service range"].value == "-10 to 150 °C"
    assert failures("SERV")["service range"].limit == "to cover -20 to 45 °C"
    assert failures("HARD")["hardness"].value == "90 Shore A"
    assert failures("PRICEY")["price"].value == "50 per kg"
    assert failures("NOPRICE")["price"].value == "unknown"
    low = failures("LOWETA")["worst-case loss factor"]
    assert float(low.value) == pytest.approx(eta_low, rel=5e-3)  # printed to 3 figures
    assert low.limit == f">= {limit:g}"
    assert set(failures("MULTI")) == {"service range", "hardness", "price"}
    for g in result.excluded:
        assert not g.passed and g.rank is None and g.score is None
        assert g.reason.startswith("excluded: ")
        for fail in g.failures:
            assert fail.constraint in g.reason
    assert result.shortlist[0].reason.endswith("meets every constraint")


def test_mount_constraints_exclude_with_their_values():
    # A heavy load on small soft pads: static strain above the compression limit (0.15,
    # common practice) yet below 1 (a pad that cannot carry the load at all is excused
    # the other checks); a tight transmissibility limit at 24.7 Hz.
    curves = {"SOFT": VARIANTS[5], "STIFF": VARIANTS[6]}
    mats = {"SOFT": material("SOFT"), "STIFF": material("STIFF")}
    design = MountDesign(
        layout="compression", mass_kg=400.0, mounts=4, area_mm2=400.0, thickness_mm=10.0
    )
    cons = Constraints(max_transmissibility=0.01, allow_extrapolation=True)
    result = rank(curves, mats, Criteria(window=WINDOW, constraints=cons, mount=design))
    assert result.shortlist == []
    mres = result.mount
    for k, gid in enumerate(mres.ids):
        g = next(x for x in result.excluded if x.id == gid)
        fails = {f.constraint: f for f in g.failures}
        worst_t = float(np.nanmax(mres.transmissibility[k]))
        named = fails.get("transmissibility") or fails["amplifies the disturbance"]
        assert named.value.startswith("T = ")
        assert float(named.value.split()[2]) == pytest.approx(worst_t, rel=5e-3)
        assert " °C, 24.7 Hz" in named.value  # where it is worst
        assert named.limit == "< 0.01 at every temperature"
        assert g.mount["id"] == gid
    soft = next(x for x in result.excluded if x.id == "SOFT")
    strain = next(f for f in soft.failures if "strain" in f.constraint)
    assert float(re.search(r"strain ([\d.]+)", strain.constraint).group(1)) > 0.15
    assert strain.limit.startswith("<= 0.15")


# ------------------------------------------------------------------ criteria files


FULL = Criteria(
    window=OperatingWindow(
        temp_range=(-10.0, 50.0),
        temp_step=2.5,
        freq_range=(20.0, 500.0),
        freq_points=9,
        duty_points=(DutyPoint(0.0, 30.0, 1.0), DutyPoint(40.0, 60.0, 2.0)),
        design_frequency_Hz=100.0,
    ),
    design="damping_layer",
    indices=(
        IndexChoice("loss_modulus", 2.0, "weighted"),
        IndexChoice("damping_span", 1.0),
        IndexChoice("soft_damping", 0.5, "best", "loss_factor / storage_modulus", False),
    ),
    constraints=Constraints(
        hardness_range=(40.0, 70.0),
        max_price=12.5,
        min_loss_factor=0.1,
        max_transmissibility=0.5,
        fn_range_Hz=(5.0, 15.0),
        max_static_strain=0.12,
        allow_extrapolation=True,
    ),
    mount=MountDesign(layout="shear", mass_kg=120.0, mounts=3, disturbance_Hz=(24.7, 49.4)),
    pareto=("loss_modulus", "damping_span"),
    eta_threshold=0.15,
)


def test_criteria_dict_round_trip():
    assert Criteria.from_dict(FULL.to_dict()) == FULL
    assert Criteria.from_dict(json.loads(json.dumps(FULL.to_dict()))) == FULL
    assert Criteria.from_dict(Criteria().to_dict()) == Criteria()
    assert [c.name for c in Criteria().indices] == [
        "loss_factor",
        "frequency_drift",
        "worst_transmissibility",
        "isolation_efficiency",
    ]
    assert Criteria().mount == default_mount()  # an isolation design checks a mount
    assert default_mount().target_fn_Hz == 10.0 and default_mount().thickness_mm == 25.0
    screening = Criteria(screening_only=True)
    assert screening.mount is None
    assert [c.name for c in screening.indices] == ["loss_factor", "stiffness_drift"]
    assert Criteria.from_dict(screening.to_dict()) == screening


def test_criteria_save_and_load_json(tmp_path):
    path = tmp_path / "criteria.json"
    FULL.save(path)
    assert Criteria.load(path) == FULL


TOML_TEXT = """\
design = "damping_layer"
eta_threshold = 0.15
pareto = ["loss_modulus", "damping_span"]

[window]
temp_range = [-10, 50]
temp_step = 2.5
freq_range = [20.0, 500.0]
freq_points = 9
design_frequency_Hz = 100.0
duty_points = [
  { temp_C = 0.0, freq_Hz = 30.0, share = 1.0 },
  { temp_C = 40.0, freq_Hz = 60.0, share = 2.0 },
]

[[indices]]
name = "loss_modulus"
weight = 2.0
aggregate = "weighted"

[[indices]]
name = "damping_span"

[[indices]]
name = "soft_damping"
weight = 0.5
aggregate = "best"
formula = "loss_factor / storage_modulus"
higher_is_better = false

[constraints]
hardness_range = [40, 70]
max_price = 12.5
min_loss_factor = 0.1
max_transmissibility = 0.5
fn_range_Hz = [5, 15]
max_static_strain = 0.12
allow_extrapolation = true

[mount]
layout = "shear"
mass_kg = 120.0
mounts = 3
disturbance_Hz = [24.7, 49.4]
"""


def test_criteria_load_toml(tmp_path):
    path = tmp_path / "criteria.toml"
    path.write_text(TOML_TEXT)
    assert Criteria.load(path) == FULL


@pytest.mark.parametrize(
    ("text", "suffix", "message"),
    [
        ("{not json", ".json", "not valid JSON"),
        ("design = ", ".toml", "not valid TOML"),
        ('{"indices": [{"name": "tan_delta"}]}', ".json", "unknown merit index 'tan_delta'"),
        ('{"windw": {}}', ".json", r"unknown criteria setting\(s\) windw"),
    ],
)
def test_criteria_load_errors_name_the_file(tmp_path, text, suffix, message):
    path = tmp_path / f"bad{suffix}"
    path.write_text(text)
    with pytest.raises(CriteriaError, match=re.escape(str(path)) + ": .*" + message):
        Criteria.load(path)


def test_criteria_load_missing_file(tmp_path):
    with pytest.raises(CriteriaError, match="nothere.json: file not found"):
        Criteria.load(tmp_path / "nothere.json")


@pytest.mark.parametrize(
    ("make", "message"),
    [
        (lambda: Criteria(indices=(IndexChoice("tan_delta"),)), "unknown merit index 'tan_delta'"),
        (lambda: Criteria(design="bridge"), "design type 'bridge' is not one of"),
        (
            lambda: Criteria.from_dict({"window": {"temp_range": [45, -20]}}),
            "temperature range 45 to -20 degC is inverted",
        ),
        (
            lambda: Criteria.from_dict({"window": {"freq_points": 0}}),
            "the frequency band needs at least one point",
        ),
        (
            lambda: Criteria(indices=(IndexChoice("bad", formula="loss_factor *"),)),
            "formula 'loss_factor \\*' is not valid",
        ),
        (
            lambda: Criteria(indices=(IndexChoice("loss_factor", aggregate="weighted"),)),
            "the 'weighted' aggregation needs duty points",
        ),
        (
            lambda: Criteria(indices=(IndexChoice("loss_factor", aggregate="median"),)),
            "unknown aggregation 'median'",
        ),
        (
            lambda: Criteria(indices=(IndexChoice("loss_factor"), IndexChoice("loss_factor"))),
            "an index is chosen twice",
        ),
        (lambda: Criteria(indices=(IndexChoice("loss_factor", -1.0),)), "weight must be"),
        (
            lambda: Criteria(indices=(IndexChoice("loss_factor", float("nan")),)),
            "weight must be",
        ),
        (lambda: Criteria(indices=(IndexChoice("loss_factor", 0.0),)), "weight above zero"),
        (
            lambda: Criteria(pareto=("loss_factor", "damping_span")),
            "Pareto index 'damping_span' is not among the chosen indices",
        ),
        (
            lambda: Criteria(screening_only=True, constraints=Constraints(fn_range_Hz=(5.0, 10.0))),
            "an fn limit needs a mount design",
        ),
        (
            lambda: Criteria(screening_only=True, indices=(IndexChoice("frequency_drift"),)),
            "index 'frequency_drift' needs a mount design",
        ),
        (
            lambda: Criteria(design="general", screening_only=True),
            "screening_only applies to the isolation-mount design",
        ),
        (
            lambda: Constraints(min_isolation_efficiency=1.0),
            r"min_isolation_efficiency 1 must lie in \[0, 1\)",
        ),
        (lambda: Criteria(eta_threshold=0.0), "loss-factor threshold must be positive"),
        (lambda: Criteria.from_dict(["loss_factor"]), "criteria must be a mapping"),
        (lambda: Criteria.from_dict({"indices": [{"weight": 1}]}), "bad index entry"),
        (
            lambda: Constraints.from_dict({"hardness_range": [70, 40]}),
            "hardness_range 70 to 40 is inverted",
        ),
        (lambda: Constraints.from_dict({"max_cost": 3}), r"unknown constraint\(s\) max_cost"),
    ],
)
def test_bad_criteria(make, message):
    with pytest.raises(CriteriaError, match=message):
        make()


@pytest.mark.parametrize(
    "pareto",
    [
        ("loss_factor",),
        ("loss_factor", "loss_factor"),
        ("loss_factor", "frequency_drift", "loss_factor"),
    ],
)
def test_pareto_needs_exactly_two_indices(pareto):
    with pytest.raises(CriteriaError, match="Pareto front needs exactly two different chosen"):
        Criteria(pareto=pareto)


@pytest.mark.parametrize(
    ("data", "message"),
    [
        ({"eta_threshold": "high"}, "eta_threshold must be a number, not 'high'"),
        ({"eta_threshold": float("nan")}, "eta_threshold must be a finite number, not nan"),
        ({"eta_threshold": True}, "eta_threshold must be a number, not True"),
        ({"window": [-20, 45]}, "window must be a mapping of settings, not [-20, 45]"),
        ({"constraints": [1]}, "constraints must be a mapping of settings, not [1]"),
        (
            {"constraints": {"hardness_range": [40]}},
            "hardness_range must be two numbers [low, high], not [40]",
        ),
        (
            {"constraints": {"fn_range_Hz": "5-10"}},
            "fn_range_Hz must be two numbers [low, high], not '5-10'",
        ),
        ({"constraints": {"hardness_range": [40, "x"]}}, "hardness_range must be a number"),
        ({"constraints": {"max_price": "cheap"}}, "max_price must be a number, not 'cheap'"),
        (
            {"constraints": {"min_loss_factor": float("inf")}},
            "min_loss_factor must be a finite number, not inf",
        ),
        ({"constraints": {"max_static_strain": "0.2"}}, "max_static_strain must be a number"),
        (
            {"constraints": {"service_covers_window": 0}},
            "service_covers_window must be true or false, not 0",
        ),
        ({"indices": {"name": "loss_factor"}}, "indices must be a list of index entries"),
        ({"indices": ["loss_factor"]}, "bad index entry 1: needs a mapping with a 'name'"),
        (
            {"indices": [{"name": "loss_factor", "weigth": 2}]},
            "unknown setting(s) in index entry 1: weigth",
        ),
        (
            {"indices": [{"name": "loss_factor", "weight": "heavy"}]},
            "index 'loss_factor': weight must be a number, not 'heavy'",
        ),
        ({"indices": [{"name": 7}]}, "index name must be non-blank text, not 7"),
        (
            {"indices": [{"name": "loss_factor", "aggregate": 3}]},
            "index 'loss_factor': aggregation must be one of",
        ),
        (
            {"indices": [{"name": "mine", "formula": 2}]},
            "index 'mine': formula must be text, not 2",
        ),
        ({"pareto": "loss_factor"}, "pareto must be a list of two index names"),
    ],
)
def test_criteria_values_of_the_wrong_type_are_criteria_errors(data, message):
    with pytest.raises(CriteriaError, match=re.escape(message)):
        Criteria.from_dict(data)


@pytest.mark.parametrize(
    ("data", "message"),
    [
        (
            {"indices": [{"name": "mine", "formula": "loss_factor", "higher_is_better": "false"}]},
            "index 'mine': higher_is_better must be true or false, not 'false'",
        ),
        (
            {"constraints": {"allow_extrapolation": "false"}},
            "allow_extrapolation must be true or false, not 'false'",
        ),
        (
            {"constraints": {"service_covers_window": "no"}},
            "service_covers_window must be true or false, not 'no'",
        ),
    ],
)
def test_boolean_settings_given_as_text_are_not_silently_true(data, message):
    with pytest.raises(CriteriaError, match=re.escape(message)):
        Criteria.from_dict(data)


def test_boolean_and_number_settings_of_the_right_type_are_kept():
    data = {
        "indices": [
            {"name": "mine", "formula": "loss_factor", "higher_is_better": False, "weight": 2}
        ],
        "constraints": {
            "allow_extrapolation": True,
            "service_covers_window": False,
            "hardness_range": [40, 70],
            "max_price": 8,
        },
        "eta_threshold": 0.3,
    }
    c = Criteria.from_dict(data)
    assert c.indices[0].higher_is_better is False and c.indices[0].weight == 2.0
    assert c.constraints.allow_extrapolation is True
    assert c.constraints.service_covers_window is False
    assert c.constraints.hardness_range == (40.0, 70.0) and c.constraints.max_price == 8.0
    assert c.eta_threshold == 0.3


def test_index_choice_checks_its_own_types():
    with pytest.raises(CriteriaError, match=r"index 'loss_factor': weight must be a number"):
        IndexChoice("loss_factor", weight="1")
    with pytest.raises(CriteriaError, match=r"higher_is_better must be true or false, not 1"):
        IndexChoice("mine", formula="loss_factor", higher_is_better=1)
    with pytest.raises(CriteriaError, match=r"index name must be non-blank text, not ''"):
        IndexChoice("")


# ------------------------------------------------------------------ Pareto front


def brute_force_pareto(a, b):
    """Definition of a Pareto-optimal point (higher is better on both), O(n^2)."""
    out = []
    for i in range(len(a)):
        dominated = any(
            a[j] >= a[i] and b[j] >= b[i] and (a[j] > a[i] or b[j] > b[i]) for j in range(len(a))
        )
        out.append(not dominated)
    return out


@settings(max_examples=200, deadline=None)
@given(
    st.lists(
        st.tuples(st.integers(-4, 4), st.integers(-4, 4)), min_size=0, max_size=30
    )  # small integers: many ties and duplicates
)
def test_pareto_front_equals_its_definition(points):
    from engine.selection.ranking import pareto_optimal

    a = np.array([p[0] for p in points], dtype=float)
    b = np.array([p[1] for p in points], dtype=float)
    assert pareto_optimal(a, b).tolist() == brute_force_pareto(a.tolist(), b.tolist())


def test_a_deferred_failure_writes_its_sentence_once_and_only_when_read():
    # engine.selection.results.DeferredFailure: counted by its kind without its
    # sentence being written; read, it is the sentence a plain Failure would carry.
    from engine.selection.results import DeferredFailure

    written = []

    def sentence():
        written.append(1)
        return "pad too stiff: the pad would be 3.1 mm2"

    failure = DeferredFailure(sentence, "", "", "pad too stiff")
    failure.topic = "mount"
    assert failure.about == "pad too stiff" and not written
    assert failure.text() == failure.constraint == "pad too stiff: the pad would be 3.1 mm2"
    assert written == [1]


def test_isolation_limits_name_where_they_fail():
    # Pads sized for 10 Hz under 45 kg each; a disturbance at 24.7 Hz. Amplification at
    # resonance of a hysteretic isolator is sqrt(1 + eta^2) / eta (Snowdon 1968), and an
    # isolation efficiency of 90 % means T <= 0.1 (common practice).
    curves = {"SOFT": VARIANTS[5], "BASE": VARIANTS[0]}
    mats = {"SOFT": material("SOFT"), "BASE": material("BASE")}
    design = MountDesign(thickness_mm=25.0, target_fn_Hz=10.0)
    cons = Constraints(
        allow_extrapolation=True,
        max_static_strain=1e3,
        min_isolation_efficiency=0.9,
        max_amplification=1.0,
    )
    assert cons.transmissibility_limit == pytest.approx(0.1)
    result = rank(curves, mats, Criteria(window=WINDOW, constraints=cons, mount=design))
    mres = result.mount
    checked = 0
    for k, gid in enumerate(mres.ids):
        g = next(x for x in result.grades if x.id == gid)
        fails = {f.constraint: f for f in g.failures}
        if mres.failing["cannot_carry"][k] or mres.failing["too_stiff"][k]:
            # An unusable pad gets that reason alone (its other figures follow from it).
            assert [f.constraint for f in g.failures] == [mres.reason("cannot_carry", k)] or [
                f.constraint for f in g.failures
            ] == [mres.reason("too_stiff", k)]
            continue
        checked += 1
        amp = fails["amplification passing through resonance"]
        worst_t = int(np.nanargmax(mres.amplification[k]))
        fn, temp = mres.natural_frequency[k, worst_t], mres.temperatures[worst_t]
        eta = float(curves[gid].evaluate(temp, fn).loss_factor)
        assert float(amp.value.split()[0]) == pytest.approx(np.sqrt(1 + eta**2) / eta, rel=5e-3)
        assert amp.value.endswith(f"at {temp:g} °C")
        worst = float(np.nanmax(mres.transmissibility[k]))
        if worst > 0.1:
            named = fails.get("transmissibility") or fails["amplifies the disturbance"]
            assert named.limit == "< 0.1 at every temperature (isolation efficiency >= 90%)"
        assert not g.passed
    assert checked, "at least one grade carries its load and is checked for isolation"
