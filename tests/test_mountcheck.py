"""Tests of engine.curves.mountcheck: the vectorised mount check of many grades.

With a frequency-independent grade (:func:`tests.helpers.flat_bank`) the closed
forms of the single-degree-of-freedom isolator apply exactly:
fn = (1/2 pi) sqrt(k/m) with k = G A/h (shear) or Ec A/h with Ec = E (1 + 2 k S^2)
(Gent & Lindley 1959), the hysteretic transmissibility
T = sqrt((1 + eta^2)/((1 - r^2)^2 + eta^2)) (Snowdon 1968), and the static deflection
delta = m g / k with fn = (1/2 pi) sqrt(g/delta) (15.76 Hz at 1 mm, common practice).
The demo library adds real, temperature-dependent curves.
"""

from __future__ import annotations

import dataclasses
import re

import numpy as np
import pytest

from engine.base.errors import CriteriaError
from engine.curves.bank import CurveBank
from engine.curves.mountcheck import FALLBACK_K_FACTOR, MountDesign, check_mounts
from engine.library.fits import fit_library
from engine.physics import mount
from tests.helpers import flat_bank

G0 = 9.80665  # standard gravity [m/s2], CGPM 1901
TWO_PI = 2.0 * np.pi
NO = np.array([np.nan])


def closed_fn(k, m):
    """fn = (1/2 pi) sqrt(k/m) [Hz] (Snowdon 1968)."""
    return np.sqrt(k / m) / TWO_PI


# ------------------------------------------------------------------ shear pads


def test_shear_pad_natural_frequency_closed_form():
    # k = G A / h per pad; 180 kg on 4 pads -> 45 kg each (Gent 2012; Snowdon 1968).
    g_shear, e_tensile, nu = 1.0e6, 3.0e6, 0.4
    bank = flat_bank([g_shear, e_tensile], [0.1, 0.3], ["shear", "tensile"])
    design = MountDesign(layout="shear", mass_kg=180.0, mounts=4, area_mm2=2000, thickness_mm=10)
    res = check_mounts(bank, design, np.array([-10.0, 23.0, 60.0]), np.array([np.nan, nu]), NO)
    area, h, m = 2000e-6, 10e-3, 45.0
    # Tensile data in a shear pad: G = E / (2 (1 + nu)) (Timoshenko & Goodier 1970).
    k = np.array([g_shear, e_tensile / (2.0 * (1.0 + nu))]) * area / h
    expected = closed_fn(k, m)
    assert res.natural_frequency.shape == (2, 3)
    assert res.converged.all()
    np.testing.assert_allclose(res.natural_frequency, expected[:, None] * np.ones(3), rtol=1e-9)
    np.testing.assert_allclose(res.shape_factor, 0.0)
    assert res.strain_limit == mount.STATIC_SHEAR_STRAIN_LIMIT == 0.5  # common practice


def test_transmissibility_is_the_hysteretic_closed_form():
    # Snowdon 1968: constant k and eta -> T = sqrt((1 + eta^2)/((1 - r^2)^2 + eta^2)).
    eta = np.array([0.05, 0.3, 1.0])
    bank = flat_bank([0.6e6, 1.0e6, 1.5e6], eta, "shear")
    dist = (5.0, 24.7, 50.0, 120.0)
    design = MountDesign(
        layout="shear", mass_kg=60.0, mounts=2, area_mm2=1500, thickness_mm=12, disturbance_Hz=dist
    )
    res = check_mounts(bank, design, np.array([0.0, 40.0]), np.full(3, np.nan), np.full(3, 50.0))
    fn = closed_fn(np.array([0.6e6, 1.0e6, 1.5e6]) * 1500e-6 / 12e-3, 30.0)
    r = np.asarray(dist)[None, :] / fn[:, None]
    expected = np.sqrt((1 + eta[:, None] ** 2) / ((1 - r**2) ** 2 + eta[:, None] ** 2))
    assert res.transmissibility.shape == (3, 2, 4)
    for j in range(2):
        np.testing.assert_allclose(res.transmissibility[:, j, :], expected, rtol=1e-9)
    # At resonance: T = sqrt(1 + eta^2)/eta and eta(fn) = eta (Snowdon 1968).
    np.testing.assert_allclose(res.amplification[:, 0], np.sqrt(1 + eta**2) / eta, rtol=1e-9)
    np.testing.assert_allclose(res.loss_factor_at_resonance[:, 1], eta, rtol=1e-12)
    # T = 1 at r = sqrt(2) whatever eta is (Snowdon 1968).
    np.testing.assert_allclose(res.isolation_onset[:, 0], np.sqrt(2.0) * fn, rtol=1e-9)


# ------------------------------------------------------------------ compression pads


def test_compression_pad_with_given_shape_factor():
    # Gent & Lindley 1959: Ec = E (1 + 2 k S^2), k_pad = Ec A / h.
    e, s, kf = 3.0e6, 0.8, 0.6
    bank = flat_bank([e, e / 3.0], [0.1, 0.1], ["tensile", "shear"])
    design = MountDesign(
        layout="compression",
        mass_kg=100.0,
        mounts=4,
        area_mm2=2500,
        thickness_mm=20,
        shape_factor=s,
        k_factor=kf,
    )
    res = check_mounts(bank, design, np.array([23.0]), np.full(2, np.nan), np.full(2, np.nan))
    ec = e * (1.0 + 2.0 * kf * s**2)
    expected = closed_fn(ec * 2500e-6 / 20e-3, 25.0)
    # A shear-mode grade of G = E/3 (nu = 0.5) gives the same compression pad.
    np.testing.assert_allclose(res.natural_frequency[:, 0], [expected, expected], rtol=1e-9)
    np.testing.assert_allclose(res.shape_factor, s)
    np.testing.assert_allclose(res.k_factor, kf)
    assert res.notes == {}
    assert res.strain_limit == mount.STATIC_COMPRESSIVE_STRAIN_LIMIT == 0.15  # common practice


@pytest.mark.parametrize("shape", ["disc", "square"])
def test_compression_pad_shape_factor_from_area(shape):
    # Gent & Lindley 1959: S = D/(4h) for a disc, L/(4h) for a square of side L;
    # k = 0.73 at 50 Shore A (Gent & Lindley table, from memory).
    e, area, h = 2.0e6, 2000e-6, 25e-3
    bank = flat_bank([e], [0.1], "tensile")
    design = MountDesign(
        layout="compression", mass_kg=45.0, mounts=1, area_mm2=2000, thickness_mm=25, shape=shape
    )
    res = check_mounts(bank, design, np.array([23.0]), NO, np.array([50.0]))
    side = np.sqrt(4.0 * area / np.pi) if shape == "disc" else np.sqrt(area)
    s = side / (4.0 * h)
    assert res.shape_factor[0] == pytest.approx(s, rel=1e-12)
    assert res.k_factor[0] == pytest.approx(0.73, abs=0.005)
    ec = e * (1.0 + 2.0 * 0.73 * s**2)
    assert res.natural_frequency[0, 0] == pytest.approx(closed_fn(ec * area / h, 45.0), rel=1e-9)


def test_k_factor_from_hardness_and_its_notes():
    # Gent & Lindley table (from memory): 40 Shore A -> 0.85; outside 30-75 the nearest
    # row (75 -> 0.52) is used with a note; unknown hardness -> 0.73 with a note.
    bank = flat_bank([2e6, 2e6, 2e6], [0.1, 0.1, 0.1], "tensile", ids=["H40", "H80", "HNAN"])
    design = MountDesign(layout="compression")
    res = check_mounts(
        bank, design, np.array([23.0]), np.full(3, np.nan), np.array([40.0, 80.0, np.nan])
    )
    np.testing.assert_allclose(res.k_factor, [0.85, 0.52, FALLBACK_K_FACTOR], atol=0.005)
    assert FALLBACK_K_FACTOR == 0.73
    assert "H40" not in res.notes
    assert any("outside the k-factor table" in n for n in res.notes["H80"])
    assert any("hardness unknown" in n for n in res.notes["HNAN"])


def test_shear_layout_adds_no_k_factor_note():
    # A shear pad uses k' = G'A/h only (Gent & Lindley 1959): no k factor, no note on it.
    bank = flat_bank([1e6], [0.1], "shear", ids=["NOHARD"])
    res = check_mounts(bank, MountDesign(layout="shear"), np.array([23.0]), NO, NO)
    assert res.notes.get("NOHARD", []) == []
    assert np.isnan(res.k_factor).all()


def test_long_term_sag_on_an_extrapolated_curve_has_a_note():
    # The sag reads the curve at f = 1/(2 pi t): 1000 h -> 4.4e-8 Hz, below a grade whose
    # data reach down to 1e-5 Hz, so its note names the life and the hottest window
    # temperature in degrees Celsius; the same grade with data down to 1e-25 Hz has none.
    bank = dataclasses.replace(
        flat_bank([1e6, 1e6], [0.1, 0.1], "shear", ids=["SHORT", "LONG"]),
        fr_lo=np.array([-5.0, -25.0]),
    )
    design = MountDesign(layout="shear", service_life_h=1000.0)
    none = np.full(2, np.nan)
    res = check_mounts(bank, design, np.array([-10.0, 40.0]), none, none)
    assert res.notes["SHORT"] == [
        "long-term sag after 1000 h at 40 °C extrapolates the master curve"
    ]
    assert res.notes.get("LONG", []) == []


# ------------------------------------------------------------------ static deflection


def test_static_deflection_and_fn_from_deflection():
    # delta = m g / k; fn = (1/2 pi) sqrt(g / delta) = 15.76 Hz at 1 mm (common practice).
    m, area, h = 45.0, 2000e-6, 10e-3
    k = m * G0 / 1e-3  # a pad that deflects 1 mm under 45 kg
    bank = flat_bank([k * h / area], [0.15], "shear")
    design = MountDesign(layout="shear", mass_kg=180.0, mounts=4, area_mm2=2000, thickness_mm=10)
    res = check_mounts(bank, design, np.array([23.0]), NO, NO)
    assert res.static_deflection[0, 0] == pytest.approx(1e-3, rel=1e-12)
    assert res.static_strain[0, 0] == pytest.approx(0.1, rel=1e-12)
    assert res.natural_frequency[0, 0] == pytest.approx(15.76, abs=0.005)
    from_delta = mount.natural_frequency_from_deflection(res.static_deflection[0, 0])
    assert res.natural_frequency[0, 0] == pytest.approx(from_delta, rel=1e-9)
    # A flat grade creeps not at all: the long-term sag equals the static deflection.
    assert res.sag[0] == pytest.approx(1e-3, rel=1e-12)


def test_pads_share_the_mass():
    # N identical pads in parallel carry m/N each: 4 pads under 180 kg behave like one
    # pad under 45 kg, and doubling the number of pads raises fn by sqrt(2).
    bank = flat_bank([2.0e6], [0.1], "tensile")
    t = np.array([23.0])

    def run(mass, mounts):
        design = MountDesign(layout="compression", mass_kg=mass, mounts=mounts, k_factor=0.7)
        return check_mounts(bank, design, t, NO, NO)

    four, one, eight = run(180.0, 4), run(45.0, 1), run(180.0, 8)
    assert MountDesign(mass_kg=180.0, mounts=4).mass_per_pad == 45.0
    np.testing.assert_allclose(four.natural_frequency, one.natural_frequency, rtol=1e-12)
    np.testing.assert_allclose(four.static_deflection, one.static_deflection, rtol=1e-12)
    np.testing.assert_allclose(
        eight.natural_frequency, np.sqrt(2.0) * four.natural_frequency, rtol=1e-9
    )
    np.testing.assert_allclose(eight.static_deflection, four.static_deflection / 2, rtol=1e-12)


# ------------------------------------------------------------------ sizing


@pytest.mark.parametrize(
    ("layout", "extra"),
    [
        ("shear", {}),
        ("compression", {"shape": "disc"}),
        ("compression", {"shape": "square"}),
        ("compression", {"shape_factor": 0.6}),
    ],
)
def test_sized_area_puts_fn_on_target_flat(layout, extra):
    bank = flat_bank([0.8e6, 2.4e6, 6.0e6], [0.1, 0.2, 0.05], ["shear", "tensile", "tensile"])
    design = MountDesign(
        layout=layout, mass_kg=240.0, mounts=4, thickness_mm=20, target_fn_Hz=9.0, **extra
    )
    res = check_mounts(bank, design, np.array([23.0]), np.full(3, np.nan), np.full(3, 55.0))
    np.testing.assert_allclose(res.natural_frequency[:, 0], 9.0, rtol=1e-3)
    # G' = 0.8 MPa in shear equals E' = 2.4 MPa with nu = 0.5 (E = 3G, common practice):
    # the same pad; the stiffer third grade needs a smaller one for the same fn.
    assert res.area[0] == pytest.approx(res.area[1], rel=1e-9)
    assert res.area[1] > res.area[2]
    if layout == "compression" and "shape" in extra:
        side = np.sqrt(4 * res.area / np.pi) if extra["shape"] == "disc" else np.sqrt(res.area)
        np.testing.assert_allclose(res.shape_factor, side / (4 * 20e-3), rtol=1e-12)


@pytest.fixture(scope="module")
def demo(demo_library):
    curves, errors = fit_library(demo_library, processes=1)
    assert not errors
    materials = {m.id: m for m in demo_library.materials()}
    return curves, materials


def _bank(demo, ids):
    curves, materials = demo
    bank = CurveBank.from_curves({i: curves[i] for i in ids})
    mats = [materials[i] for i in ids]
    poisson = np.array([np.nan if m.poisson_ratio is None else m.poisson_ratio for m in mats])
    hardness = np.array([np.nan if m.hardness is None else m.hardness for m in mats])
    return bank, poisson, hardness


RUBBERS = ["BW-NR40", "LAB-NR55", "QC-EPDM60", "FP-IIR50", "BW-CR60"]


@pytest.mark.parametrize(
    ("layout", "shape"), [("shear", "disc"), ("compression", "disc"), ("compression", "square")]
)
def test_sized_area_puts_fn_on_target_for_real_curves(demo, layout, shape):
    # The stiffness depends on frequency; sizing at the target frequency makes
    # fn = target at the sizing temperature (within 1e-3 relative).
    bank, poisson, hardness = _bank(demo, RUBBERS)
    design = MountDesign(
        layout=layout,
        shape=shape,
        mass_kg=180.0,
        mounts=4,
        thickness_mm=25,
        target_fn_Hz=8.0,
        sizing_temp_C=23.0,
    )
    res = check_mounts(bank, design, np.array([-20.0, 23.0, 45.0]), poisson, hardness)
    np.testing.assert_allclose(res.natural_frequency[:, 1], 8.0, rtol=1e-3)


def test_fn_rises_as_the_window_gets_colder(demo):
    # A rubber above its glass transition stiffens as it cools (Ferry 1980, ch. 11):
    # fn rises monotonically from hot to cold.
    bank, poisson, hardness = _bank(demo, RUBBERS)
    design = MountDesign(layout="compression", mass_kg=180.0, mounts=4, thickness_mm=25)
    t = np.array([45.0, 23.0, 0.0, -20.0])
    res = check_mounts(bank, design, t, poisson, hardness)
    assert res.converged.all()
    assert (np.diff(res.natural_frequency, axis=1) > 0).all()


def test_dynamic_stiffness_exceeds_static(demo):
    # Rubber is stiffer dynamically than under a static load (common practice): fn of
    # the real pad is at least the static-deflection estimate (1/2 pi) sqrt(g/delta).
    bank, poisson, hardness = _bank(demo, RUBBERS)
    design = MountDesign(layout="compression", mass_kg=180.0, mounts=4, thickness_mm=25)
    res = check_mounts(bank, design, np.array([-20.0, 23.0, 45.0]), poisson, hardness)
    estimate = mount.natural_frequency_from_deflection(res.static_deflection)
    assert (res.natural_frequency >= estimate).all()
    # and the sag after the service life at the hottest temperature is no smaller than
    # the 10 s deflection there (creep, common practice).
    assert (res.sag >= res.static_deflection[:, -1] * (1 - 1e-12)).all()


def test_strain_limit_is_exceeded_by_an_overloaded_pad(demo):
    # 2 t on four small, soft pads: the compressive strain far exceeds the 0.15 limit.
    bank, poisson, hardness = _bank(demo, ["BW-NR40"])
    design = MountDesign(
        layout="compression", mass_kg=2000.0, mounts=4, area_mm2=400, thickness_mm=10
    )
    res = check_mounts(bank, design, np.array([23.0]), poisson, hardness)
    assert res.static_strain[0, 0] > res.strain_limit
    assert res.sag_strain[0] >= res.static_strain[0, 0]
    figures = res.grade(0)
    assert figures["static_deflection_mm"][0] == pytest.approx(res.static_deflection[0, 0] * 1e3)
    assert figures["area_mm2"] == pytest.approx(400.0)
    assert figures["strain_limit"] == 0.15


# ------------------------------------------------------------------ validation


@pytest.mark.parametrize(
    ("kwargs", "message"),
    [
        ({"layout": "torsion"}, "layout 'torsion' is not one of shear, compression"),
        ({"shape": "ring"}, "pad shape 'ring' is not one of disc, square"),
        ({"mass_kg": 0.0}, "mount mass_kg must be a positive number"),
        ({"mass_kg": float("nan")}, "mount mass_kg must be a positive number"),
        ({"area_mm2": -1.0}, "mount area_mm2 must be a positive number"),
        ({"thickness_mm": 0.0}, "mount thickness_mm must be a positive number"),
        ({"service_life_h": 0.0}, "mount service_life_h must be a positive number"),
        ({"mounts": 0}, "number of mounts must be a whole number >= 1"),
        ({"mounts": 2.5}, "number of mounts must be a whole number >= 1"),
        ({"disturbance_Hz": ()}, "give at least one positive disturbance frequency"),
        ({"disturbance_Hz": (24.7, -3.0)}, "give at least one positive disturbance frequency"),
        ({"shape_factor": 0.0}, "shape factor must be positive"),
        ({"k_factor": -0.5}, "k factor must be positive"),
        ({"target_fn_Hz": 0.0}, "target natural frequency must be positive"),
    ],
)
def test_mount_design_errors(kwargs, message):
    with pytest.raises(CriteriaError, match=re.escape(message)):
        MountDesign(**kwargs)


def test_mount_design_from_dict_round_trip_and_errors():
    design = MountDesign(layout="shear", mass_kg=90.0, disturbance_Hz=(24.7, 49.4), k_factor=0.6)
    assert MountDesign.from_dict(design.to_dict()) == design
    assert MountDesign.from_dict({"disturbance_Hz": 30.0}).disturbance_Hz == (30.0,)
    with pytest.raises(CriteriaError, match=r"unknown mount setting\(s\) weight; known: "):
        MountDesign.from_dict({"weight": 90.0})
    with pytest.raises(CriteriaError, match="bad mount setting"):
        MountDesign.from_dict({"shape_factor": "wide"})


@pytest.mark.parametrize(
    ("data", "message"),
    [
        ({"disturbance_Hz": "fast"}, "bad mount setting disturbance_Hz: 'fast' is not a number"),
        ({"disturbance_Hz": None}, "bad mount setting disturbance_Hz: None is not a number"),
        ({"disturbance_Hz": [24.7, "x"]}, "bad mount setting disturbance_Hz: 'x' is not a num"),
        ([1, 2], "mount design must be a mapping of settings, not [1, 2]"),
        ({"mass_kg": "heavy"}, "bad mount setting mass_kg: 'heavy' is not a number"),
        ({"mass_kg": float("nan")}, "bad mount setting mass_kg: nan is not a finite number"),
        ({"area_mm2": True}, "bad mount setting area_mm2: True is not a number"),
        ({"target_fn_Hz": float("inf")}, "bad mount setting target_fn_Hz: inf is not a finite"),
        ({"mounts": 2.5}, "bad mount setting mounts: 2.5 is not a whole number"),
        ({"mounts": "4"}, "bad mount setting mounts: '4' is not a number"),
        ({"layout": 3}, "bad mount setting layout: 3 is not text"),
    ],
)
def test_mount_design_from_dict_bad_input_is_a_criteria_error(data, message):
    with pytest.raises(CriteriaError, match=re.escape(message)):
        MountDesign.from_dict(data)


def test_mount_design_from_dict_accepts_whole_float_mounts_and_optional_none():
    # JSON writers may give 4.0 for 4 (common practice); None switches optional inputs off.
    design = MountDesign.from_dict({"mounts": 4.0, "k_factor": None, "target_fn_Hz": None})
    assert design.mounts == 4 and isinstance(design.mounts, int)
    assert design.k_factor is None and design.target_fn_Hz is None


def test_fn_matches_the_root_in_real_frequency(demo):
    # check_mounts solves in reduced frequency (mount.natural_frequency_reduced); the
    # same equation solved in real frequency on the same stiffness must agree.
    bank, poisson, hardness = _bank(demo, RUBBERS)
    design = MountDesign(layout="compression", mass_kg=180.0, mounts=4, thickness_mm=25)
    t = np.array([-20.0, 0.0, 23.0, 45.0])
    res = check_mounts(bank, design, t, poisson, hardness)
    rows = np.broadcast_to(t, (len(bank), t.size))
    # Pad stiffness per unit own modulus, from fn of the result itself at 23 degC.
    own, _, _ = bank.evaluate_rows(rows, res.natural_frequency)
    per_modulus = (TWO_PI * res.natural_frequency) ** 2 * design.mass_per_pad / own

    def stiffness(freq):
        storage, _, _ = bank.evaluate_rows(rows, freq, loss=False)
        return storage * per_modulus[:, 2:3]

    real = mount.natural_frequency(stiffness, np.full(rows.shape, design.mass_per_pad))
    assert real.converged.all()
    np.testing.assert_allclose(res.natural_frequency, real.frequency, rtol=1e-7)


def test_blocks_on_threads_give_the_same_result(demo, monkeypatch):
    # engine.base.blocks cuts the work into blocks of grades on threads: tiny blocks on two
    # workers must reproduce the single-block result exactly.
    from engine.base import blocks

    bank, poisson, hardness = _bank(demo, RUBBERS)
    design = MountDesign(layout="shear", mass_kg=100.0, mounts=4, target_fn_Hz=7.0)
    t = np.linspace(-20.0, 50.0, 8)
    whole = check_mounts(bank, design, t, poisson, hardness)
    monkeypatch.setattr(blocks, "BLOCK_POINTS", 3)
    monkeypatch.setattr(blocks, "WORKERS", 2)
    split = check_mounts(bank, design, t, poisson, hardness)
    for name in ("natural_frequency", "transmissibility", "static_strain", "sag", "extrapolated"):
        np.testing.assert_array_equal(getattr(split, name), getattr(whole, name), err_msg=name)
