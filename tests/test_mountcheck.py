"""Tests of engine.curves.mountcheck: the vectorised mount check of many grades.

With a frequency-independent grade (:func:`tests.helpers.flat_bank`) the closed
forms of the single-degree-of-freedom isolator apply exactly:
fn = (1/2 pi) sqrt(k/m) with k = G A/h (shear) or Ec,eff A/h with Ec = E (1 + 2 k S^2)
and 1/Ec,eff = 1/Ec + 1/K (Gent & Lindley 1959), the hysteretic transmissibility
T = sqrt((1 + eta^2)/((1 - r^2)^2 + eta^2)) (Snowdon 1968), and the static deflection
delta = m g / k with fn = (1/2 pi) sqrt(g/delta) (15.76 Hz at 1 mm, common practice).
A grade with a one-term spectrum (a standard linear solid) gives the static deflection
and sag from its creep compliance in closed form (Ferry 1980; Tschoegl 1989). The demo
library adds real, temperature-dependent curves. The verdict's limits are common
practice.
"""

from __future__ import annotations

import dataclasses
import re

import numpy as np
import pytest

from engine.base.errors import CriteriaError
from engine.curves.bank import CurveBank
from engine.curves.mastercurve import build_master_curve
from engine.curves.mountcheck import (
    FALLBACK_K_FACTOR,
    MAX_STATIC_STRAIN,
    MIN_FN_HZ,
    MIN_PAD_AREA_MM2,
    MIN_SIZED_AREA_FRACTION,
    SLENDER_SHAPE_FACTOR,
    STATIC_LOAD_TIME_S,
    MountDesign,
    check_mounts,
    grade_k_factors,
)
from engine.library.fits import fit_library
from engine.physics import mount
from engine.physics.prony import PronySeries
from tests import synthetic
from tests.helpers import flat_bank

G0 = 9.80665  # standard gravity [m/s2], CGPM 1901
TWO_PI = 2.0 * np.pi
NO = np.array([np.nan])
NO2 = np.array([np.nan, np.nan])


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
    # In series with the bulk modulus, 1/Ec,eff = 1/Ec + 1/K (Gent & Lindley 1959); with
    # no catalog K nor nu, K = 2000 MPa (common practice).
    ec_eff = 1.0 / (1.0 / ec + 1.0 / 2.0e9)
    expected = closed_fn(ec_eff * 2500e-6 / 20e-3, 25.0)
    # A shear-mode grade of G = E/3 (nu = 0.5) gives the same compression pad.
    np.testing.assert_allclose(res.natural_frequency[:, 0], [expected, expected], rtol=1e-9)
    np.testing.assert_allclose(res.shape_factor, s)
    np.testing.assert_allclose(res.k_factor, kf)
    assumed = "bulk modulus not in the catalog: K = 2000 MPa assumed (common practice)"
    assert res.notes == {"FLAT-0": [assumed], "FLAT-1": [assumed]}
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
    ec_eff = ec / (1.0 + ec / 2.0e9)  # 1/Ec,eff = 1/Ec + 1/K, K = 2000 MPa (common practice)
    assert res.natural_frequency[0, 0] == pytest.approx(
        closed_fn(ec_eff * area / h, 45.0), rel=1e-9
    )


def test_k_factor_from_hardness_and_its_notes():
    # Gent & Lindley table (from memory): 40 Shore A -> 0.85; outside 30-75 the nearest
    # row (75 -> 0.52) is used with a note. A blank hardness is read from the grade's own
    # modulus by the inverse of Gent's (1958) indentation relation, so that k and the
    # modulus it multiplies belong to one compound: E = 2 MPa reads as 44.5 Shore A by
    # that relation, k = 0.85 + (0.80 - 0.85) * 4.5 / 5 = 0.805 between the table's rows.
    bank = flat_bank([2e6, 2e6, 2e6], [0.1, 0.1, 0.1], "tensile", ids=["H40", "H80", "HNAN"])
    design = MountDesign(layout="compression")
    res = check_mounts(
        bank, design, np.array([23.0]), np.full(3, np.nan), np.array([40.0, 80.0, np.nan])
    )
    read = float(mount.hardness_from_youngs_modulus(2e6))
    assert read == pytest.approx(44.5, abs=0.05)
    k_read = 0.85 + (0.80 - 0.85) * (read - 40.0) / 5.0
    np.testing.assert_allclose(res.k_factor, [0.85, 0.52, k_read], atol=1e-9)
    assert not any("k =" in n or "k-factor" in n for n in res.notes["H40"])
    assert any("outside the k-factor table" in n for n in res.notes["H80"])
    assert any("k = 0.81 from the 44 Shore A" in n for n in res.notes["HNAN"])


def test_k_factor_falls_back_when_neither_hardness_nor_modulus_is_known():
    # 0.73 (the Gent & Lindley row at 50 Shore A, from memory) with a note.
    notes: dict = {}
    k = grade_k_factors(np.array([np.nan]), None, ["X"], notes, lambda: np.array([np.nan]))
    assert FALLBACK_K_FACTOR == 0.73 and k[0] == FALLBACK_K_FACTOR
    assert any("hardness unknown" in n for n in notes["X"])


def test_a_catalog_hardness_far_from_what_the_modulus_reads_is_noted():
    # 2 MPa reads as about 44 Shore A (Gent 1958); a catalog 70 is 26 points away.
    bank = flat_bank([2e6, 2e6], [0.1, 0.1], "tensile", ids=["FAR", "NEAR"])
    res = check_mounts(
        bank,
        MountDesign(layout="compression"),
        np.array([23.0]),
        np.full(2, np.nan),
        np.array([70.0, 48.0]),
    )
    assert any("reads as 44 Shore A" in n for n in res.notes["FAR"])
    assert not any("reads as" in n for n in res.notes["NEAR"])


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
        ({"disturbance_Hz": ()}, "give at least one disturbance, as a positive frequency"),
        (
            {"disturbance_Hz": (24.7, -3.0)},
            "give at least one disturbance, as a positive frequency",
        ),
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
    # The pad of Gent & Lindley (1959) built independently: Ec = E'(1 + 2 k S^2), E' = 3 G'
    # for shear data with nu from the catalog, in series with K = E/(3(1 - 2 nu)) from the
    # catalog nu (or 2000 MPa where nu is blank, common practice), k' = Ec,eff A / h.
    nu = np.where(np.isnan(poisson), 0.5, poisson)
    to_e = np.where(bank.modes == "shear", 2.0 * (1.0 + nu), 1.0)[:, None]
    c = (1.0 + 2.0 * res.k_factor * res.shape_factor**2)[:, None]
    from_nu = (nu < 0.5)[:, None]

    def stiffness(freq):
        storage, _, _ = bank.evaluate_rows(rows, freq, loss=False)
        e = storage * to_e
        nu_used = np.where(from_nu, nu[:, None], 0.0)  # rows without nu: K not from nu
        bulk = np.where(from_nu, e / (3.0 * (1.0 - 2.0 * nu_used)), 2.0e9)
        ec = e * c
        return ec / (1.0 + ec / bulk) * res.area[:, None] / 25e-3

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


# ------------------------------------------------------------------ bulk modulus


def test_catalog_bulk_modulus_limits_the_compression_pad():
    # 1/Ec,eff = 1/Ec + 1/K with K from the catalog [MPa] (Gent & Lindley 1959; Gent 2012).
    e, s_factor, kf, bulk_mpa = 5.0e6, 2.0, 0.6, 100.0
    bank = flat_bank([e], [0.1], "tensile", ids=["CAT"])
    design = MountDesign(
        mass_kg=60.0, mounts=1, area_mm2=1000, thickness_mm=5, shape_factor=s_factor, k_factor=kf
    )
    res = check_mounts(bank, design, np.array([23.0]), NO, NO, bulk_modulus=np.array([bulk_mpa]))
    ec = e * (1.0 + 2.0 * kf * s_factor**2)
    ec_eff = 1.0 / (1.0 / ec + 1.0 / (bulk_mpa * 1e6))
    assert res.natural_frequency[0, 0] == pytest.approx(
        closed_fn(ec_eff * 1e-3 / 5e-3, 60.0), rel=1e-9
    )
    assert res.bulk_modulus[0] == pytest.approx(bulk_mpa * 1e6)
    assert res.bulk_source[0] == mount.BULK_FROM_CATALOG
    assert res.notes.get("CAT", []) == []  # a stated K needs no note
    # the static deflection uses the same series spring: delta = m g h (1/Ec + 1/K) / A
    delta = 60.0 * G0 * 5e-3 * (1.0 / ec + 1.0 / (bulk_mpa * 1e6)) / 1e-3
    assert res.static_deflection[0, 0] == pytest.approx(delta, rel=1e-9)


def test_bulk_modulus_from_poisson_ratio_and_its_note():
    # K = E / (3 (1 - 2 nu)) (Timoshenko & Goodier 1970) for nu = 0.49: 16.7 E, in series
    # with Ec (Gent & Lindley 1959); K scales with E, so k stays proportional to E'.
    e, s_factor, kf, nu = 3.0e6, 1.5, 0.7, 0.49
    bank = flat_bank([e], [0.1], "tensile", ids=["NU"])
    design = MountDesign(
        mass_kg=40.0, mounts=1, area_mm2=1500, thickness_mm=8, shape_factor=s_factor, k_factor=kf
    )
    res = check_mounts(bank, design, np.array([23.0]), np.array([nu]), NO)
    ec = e * (1.0 + 2.0 * kf * s_factor**2)
    bulk = e / (3.0 * (1.0 - 2.0 * nu))
    ec_eff = 1.0 / (1.0 / ec + 1.0 / bulk)
    assert res.natural_frequency[0, 0] == pytest.approx(
        closed_fn(ec_eff * 1.5e-3 / 8e-3, 40.0), rel=1e-9
    )
    assert res.bulk_source[0] == mount.BULK_FROM_POISSON
    assert np.isnan(res.bulk_modulus[0])
    assert res.notes["NU"] == ["bulk modulus from Poisson's ratio 0.49: K = E/(3(1 - 2ν)) = 16.7 E"]


def test_bulk_limit_as_the_shape_factor_grows_and_its_note():
    # S -> inf: Ec,eff -> K, so k -> K A / h (Gent & Lindley 1959); above S = 10 a note
    # says the stiffness leans on K (common practice).
    bank = flat_bank([2.0e6, 2.0e6], [0.1, 0.1], "tensile", ids=["S12", "S2000"])

    def run(s_factor):
        design = MountDesign(
            mass_kg=500.0,
            mounts=1,
            area_mm2=4000,
            thickness_mm=2,
            shape_factor=s_factor,
            k_factor=0.7,
        )
        return check_mounts(bank, design, np.array([23.0]), np.full(2, np.nan), NO.repeat(2))

    huge = run(2000.0)
    limit = closed_fn(2.0e9 * 4e-3 / 2e-3, 500.0)  # K = 2000 MPa (common practice)
    assert huge.natural_frequency[0, 0] == pytest.approx(limit, rel=1e-3)
    assert huge.natural_frequency[0, 0] < limit
    twelve = run(12.0)
    assert any(n.startswith("shape factor 12.0 above 10: ") for n in twelve.notes["S12"])
    small = run(0.8)
    assert not any("above 10" in n for n in small.notes["S12"])


def test_shear_pads_ignore_the_bulk_modulus():
    # A shear pad deforms at constant volume: k = G A / h whatever K is (Gent 2012).
    bank = flat_bank([1.0e6], [0.1], "shear", ids=["SH"])
    design = MountDesign(layout="shear", mass_kg=45.0, mounts=1, area_mm2=2000, thickness_mm=10)
    res = check_mounts(bank, design, np.array([23.0]), NO, NO, bulk_modulus=np.array([5.0]))
    assert res.natural_frequency[0, 0] == pytest.approx(closed_fn(1e6 * 0.2, 45.0), rel=1e-9)
    assert res.notes.get("SH", []) == []
    assert res.grade(0)["bulk_modulus_MPa"] is None


# ------------------------------------------------------------------ creep compliance


def _sls_bank(e_inf, e_1, tau, mode, ids=("SLS",)):
    """A bank of one grade whose spectrum is one Maxwell term and a spring (a standard
    linear solid, invented input) at a single isotherm: no shift at any temperature."""
    base = build_master_curve(synthetic.sweep(temperatures=[20.0]), mode)
    curve = dataclasses.replace(
        base, prony=PronySeries(tau=[tau], weights=[e_1], equilibrium=e_inf), _tables={}
    )
    return CurveBank.from_curves({ids[0]: curve}), curve


def _sls_compliance(e_inf, e_1, tau, t):
    """J(t) = 1/E_inf - (1/E_inf - 1/E_0) exp(-t E_inf / (E_0 tau)) (Ferry 1980, ch. 3;
    Tschoegl 1989)."""
    e_0 = e_inf + e_1
    return 1.0 / e_inf - (1.0 / e_inf - 1.0 / e_0) * np.exp(-t * e_inf / (e_0 * tau))


def test_static_deflection_and_sag_from_the_creep_compliance_closed_form():
    # Shear pad of a shear-mode standard linear solid: delta(t) = F h J(t) / A at
    # t = 10 s, the sag F h J(life) / A (Ferry 1980; Tschoegl 1989), J by closed form;
    # the bank's table interpolates J within 2e-4.
    e_inf, e_1, tau = 1.0e6, 1.0e6, 5.0  # retardation time tau E_0/E_inf = 10 s
    bank, curve = _sls_bank(e_inf, e_1, tau, "shear")
    design = MountDesign(
        layout="shear", mass_kg=80.0, mounts=2, area_mm2=2500, thickness_mm=12, service_life_h=2.0
    )
    res = check_mounts(bank, design, np.array([0.0, 20.0]), NO, NO)
    force, h, area = 40.0 * G0, 12e-3, 2500e-6
    j_static = _sls_compliance(e_inf, e_1, tau, STATIC_LOAD_TIME_S)
    np.testing.assert_allclose(res.static_deflection[0], force * h * j_static / area, rtol=3e-4)
    j_life = _sls_compliance(e_inf, e_1, tau, 2.0 * 3600.0)
    assert res.sag[0] == pytest.approx(force * h * j_life / area, rel=3e-4)
    # dynamic-to-static ratio: k'(fn) / k_s = G'(fn) J(10 s) (geometry cancels), G' of the
    # series (Ferry 1980); the master-curve table reads G' within 2e-3
    omega = 2.0 * np.pi * res.natural_frequency[0]
    storage = curve.prony.storage(omega)
    np.testing.assert_allclose(res.dynamic_to_static_ratio[0], storage * j_static, rtol=2e-3)
    assert (res.dynamic_to_static_ratio[0] > 1.0).all()
    # and fn = sqrt(ratio) x the static-deflection estimate (1/2 pi) sqrt(g / delta)
    estimate = mount.natural_frequency_from_deflection(res.static_deflection[0])
    np.testing.assert_allclose(
        res.natural_frequency[0], np.sqrt(res.dynamic_to_static_ratio[0]) * estimate, rtol=1e-9
    )


def test_compression_static_deflection_from_compliance_and_bulk_modulus():
    # Compression pad of a tensile standard linear solid: the static modulus 1/J(t) in
    # Ec = E (1 + 2 k S^2) in series with K (Gent & Lindley 1959):
    # delta = F h (J(t)/(1 + 2 k S^2) + 1/K) / A (Ferry 1980; Tschoegl 1989).
    e_inf, e_1, tau, s_factor, kf, bulk = 2.0e6, 3.0e6, 2.0, 1.2, 0.7, 3.0e8
    bank, _ = _sls_bank(e_inf, e_1, tau, "tensile")
    design = MountDesign(
        mass_kg=50.0, mounts=1, area_mm2=3000, thickness_mm=10, shape_factor=s_factor, k_factor=kf
    )
    res = check_mounts(bank, design, np.array([20.0]), NO, NO, bulk_modulus=np.array([bulk * 1e-6]))
    c = 1.0 + 2.0 * kf * s_factor**2
    j = _sls_compliance(e_inf, e_1, tau, STATIC_LOAD_TIME_S)
    expected = 50.0 * G0 * 10e-3 * (j / c + 1.0 / bulk) / 3000e-6
    assert res.static_deflection[0, 0] == pytest.approx(expected, rel=3e-4)


def test_creep_compliance_against_relaxation_and_the_old_estimate(demo):
    # J(t) E(t) <= 1 (Tschoegl 1989): the static deflection m g h J(t/aT) / A lies at or
    # below the one from the relaxation modulus E(t/aT). The old estimate read
    # E'(1/(2 pi t)) instead; on the fitted demo rubbers, in their rubbery plateau over
    # this window, the two differ by a few percent (not zero, not large).
    curves, materials = demo
    bank, poisson, hardness = _bank(demo, RUBBERS)
    design = MountDesign(layout="shear", mass_kg=180.0, mounts=4, area_mm2=2000, thickness_mm=10)
    t = np.array([-20.0, 0.0, 23.0, 45.0])
    res = check_mounts(bank, design, t, poisson, hardness)
    nu = np.where(np.isnan(poisson), 0.5, poisson)
    to_shear = np.where(bank.modes == "shear", 1.0, 1.0 / (2.0 * (1.0 + nu)))[:, None]
    load = 45.0 * G0 * 10e-3 / 2000e-6  # m g h / A
    relaxation = np.array(
        [curves[gid].relaxation_modulus(STATIC_LOAD_TIME_S, t) for gid in RUBBERS]
    )
    assert (res.static_deflection <= load / (relaxation * to_shear) * (1.0 + 3e-4)).all()
    rows = np.broadcast_to(t, (len(bank), t.size))
    f_static = 1.0 / (2.0 * np.pi * STATIC_LOAD_TIME_S)
    storage, _, _ = bank.evaluate_rows(rows, f_static, loss=False)
    difference = np.abs(res.static_deflection / (load / (storage * to_shear)) - 1.0)
    assert 0.005 < difference.max() < 0.1


# ------------------------------------------------------------------ verdict


def _verdict(bank, design, temps=(23.0,), **kw):
    n = len(bank)
    res = check_mounts(bank, design, np.array(temps), np.full(n, np.nan), np.full(n, 55.0), **kw)
    return res


def test_a_sound_pad_passes():
    # 45 kg on a 2000 mm2, 10 mm shear pad of G = 0.5 MPa: strain 0.044 (< 0.5), fn 7.5 Hz,
    # T < 1 at 24.7 Hz (Snowdon 1968): passes, no reasons.
    res = _verdict(flat_bank([0.5e6], [0.1], "shear"), MountDesign(layout="shear", thickness_mm=10))
    assert res.verdict == ["passes"] and res.verdict_reasons == [[]]
    figures = res.grade(0)
    assert figures["verdict"] == "passes" and figures["verdict_reasons"] == []
    assert figures["dynamic_to_static_ratio"] == pytest.approx([1.0], rel=1e-9)  # no creep


def test_static_strain_above_the_limit_fails():
    # Compression strain limit 0.15 (common practice): a soft pad at 0.2 fails, naming it.
    e = 45.0 * G0 / 2000e-6 / 0.2  # Ec,eff giving strain 0.2 with k = 0 (Ec = E)
    bank = flat_bank([e], [0.1], "tensile")
    design = MountDesign(k_factor=1e-12, shape_factor=0.6)
    res = _verdict(bank, design, bulk_modulus=np.array([np.inf]))
    assert res.static_strain[0, 0] == pytest.approx(0.2, rel=1e-6)
    assert res.reasons(0) == ["static strain 0.2 at 23 °C above the 0.15 limit"]
    assert res.verdict == ["fails"]


def test_compressive_stress_above_the_limit_fails():
    # 1 MPa static compressive stress limit (common practice): 200 kg on 1000 mm2 is
    # 1.96 MPa; a stiff pad keeps the strain small, so the stress alone fails it.
    bank = flat_bank([200e6], [0.1], "tensile")
    design = MountDesign(
        mass_kg=200.0, mounts=1, area_mm2=1000, thickness_mm=5, disturbance_Hz=(2000.0,)
    )
    res = _verdict(bank, design)
    assert res.static_stress[0] == pytest.approx(200.0 * G0 / 1e-3, rel=1e-12)
    assert res.reasons(0) == ["compressive stress 2 MPa above the 1 MPa limit"]


def test_a_tall_compression_pad_would_buckle():
    # Disc of 2000 mm2, 100 mm thick (S = 0.126) on a 10 MPa rubber under 180 kg: its
    # critical load by Haringx's shear-flexible column formula (Haringx 1948; Gent 1964),
    # P_cr = (G A / 2)(sqrt(1 + 4 P_E / (G A)) - 1), P_E = pi^2 E_b I / h^2, is below
    # twice the load (safety factor 2, common practice): it fails, the slender note stays.
    e, area, h = 10e6, 2000e-6, 0.1
    bank = flat_bank([e], [0.1], "tensile", ids=["TALL"])
    design = MountDesign(mass_kg=180.0, mounts=1, thickness_mm=100, k_factor=0.73)
    res = _verdict(bank, design)
    s = res.shape_factor[0]
    assert s == pytest.approx(np.sqrt(4 * area / np.pi) / (4 * h), rel=1e-12)
    g_a = e / 3.0 * area
    p_e = np.pi**2 * e * (1 + 2 / 3 * 0.73 * s**2) * (area**2 / (4 * np.pi)) / h**2
    p_cr = 0.5 * g_a * (np.sqrt(1 + 4 * p_e / g_a) - 1)
    assert res.critical_load[0] == pytest.approx(p_cr, rel=1e-9)
    load = 180.0 * G0
    assert p_cr < 2 * load
    assert res.reasons(0) == [
        f"pad would buckle: {load:.3g} N on a pad that buckles at {p_cr:.3g} N "
        f"(shape factor {s:.2f}; needs a safety factor of 2)"
    ]
    assert any("slender" in n for n in res.notes["TALL"])


def test_a_stubby_pad_of_shape_factor_below_half_does_not_buckle_under_a_light_load():
    # 50 mm disc, 30 mm thick (S = 0.42): P_cr of about 3.7 kN (Haringx 1948) against
    # 441 N: rubber columns this stubby are stable (Gent 1964); only the note remains.
    bank = flat_bank([3e6], [0.1], "tensile", ids=["STUB"])
    res = _verdict(bank, MountDesign(thickness_mm=30))
    assert res.shape_factor[0] < SLENDER_SHAPE_FACTOR
    assert res.critical_load[0] > 2 * 45.0 * G0
    assert not any(r.startswith("pad would buckle") for r in res.reasons(0))
    assert any("slender" in n for n in res.notes["STUB"])


def test_a_stiff_grade_sized_to_an_absurd_pad_is_too_stiff():
    # A glassy grade (3 GPa) sized for 10 Hz under 45 kg needs a pad of about 0.5 mm2, below
    # 10 mm2 and 1 % of the given 2000 mm2: the one reason given is that (common practice).
    bank = flat_bank([3e9, 1.5e6], [0.05, 0.1], "tensile", ids=["GLASS", "RUBBER"])
    design = MountDesign(thickness_mm=20, target_fn_Hz=10.0)
    res = _verdict(bank, design)
    area = res.area[0] * 1e6
    assert area < MIN_PAD_AREA_MM2 == 10.0 and area < MIN_SIZED_AREA_FRACTION * 2000.0
    assert res.reasons(0) == [f"too stiff for this load and size: the pad would be {area:.2g} mm2"]
    assert res.reasons(1) == []  # the rubber's pad is sound


def test_an_impossible_load_cannot_be_carried():
    # 1e9 kg on four pads: a static strain far beyond 1 (common practice) — one plain reason,
    # not a natural frequency of "0.00 Hz".
    bank = flat_bank([3e6], [0.1], "tensile")
    res = _verdict(bank, MountDesign(mass_kg=1e9), temps=(-20.0, 23.0))
    assert res.static_strain.min() > MAX_STATIC_STRAIN == 1.0
    reasons = res.reasons(0)
    assert len(reasons) == 1 and reasons[0].startswith("cannot carry the load: static strain ")
    assert res.grade(0)["verdict"] == "fails"


def test_a_mount_that_amplifies_does_not_isolate():
    # fn = 7.5 Hz and a disturbance at 8 Hz (below sqrt(2) fn): T > 1 (Snowdon 1968).
    bank = flat_bank([0.5e6], [0.1], "shear")
    design = MountDesign(layout="shear", thickness_mm=10, disturbance_Hz=(8.0, 30.0))
    res = _verdict(bank, design)
    t = res.transmissibility[0, 0, 0]
    assert t > 1.0
    assert res.reasons(0) == [f"does not isolate: T = {t:.2f} at 8 Hz, 23 °C"]


def test_too_soft_and_no_root_are_plain_failures():
    # 40 m of rubber: fn below 0.1 Hz (no mount, common practice), the strain over the
    # shear limit too; 1 g on a 1 GPa pad: fn above the 100 kHz search bracket.
    soft = _verdict(
        flat_bank([1.0e6], [0.1], "shear"),
        MountDesign(layout="shear", mass_kg=100.0, mounts=1, area_mm2=1000, thickness_mm=40000),
    )
    assert soft.natural_frequency[0, 0] < MIN_FN_HZ == 0.1
    assert soft.reasons(0)[0].startswith("too soft for this load: fn ")
    stiff = _verdict(
        flat_bank([1.0e9], [0.1], "shear"),
        MountDesign(layout="shear", mass_kg=1e-3, mounts=1, area_mm2=2000, thickness_mm=1),
    )
    assert not stiff.converged.any()
    assert stiff.reasons(0) == ["no natural frequency between 1 mHz and 100 kHz at 23 °C"]


def test_verdicts_of_many_grades_and_the_json(demo):
    # The README's mount (180 kg on 4 compression discs of 2000 mm2, 25 mm, 24.7 Hz): each
    # grade's JSON verdict agrees with its reasons, and the figures carry the new keys.
    bank, poisson, hardness = _bank(demo, RUBBERS)
    design = MountDesign(thickness_mm=25)
    res = check_mounts(bank, design, np.array([-20.0, 23.0, 45.0]), poisson, hardness)
    assert len(res.verdict) == len(res.verdict_reasons) == len(RUBBERS)
    for k in range(len(RUBBERS)):
        figures = res.grade(k)
        assert figures["verdict"] == ("passes" if not figures["verdict_reasons"] else "fails")
        assert figures["verdict_reasons"] == res.verdict_reasons[k]
        assert len(figures["dynamic_to_static_ratio"]) == 3
        assert figures["static_stress_MPa"] == pytest.approx(45.0 * G0 / 2000e-6 * 1e-6)
        assert figures["stress_limit_MPa"] == 1.0


# ------------------------------------------------------------------ working amplitude


def _kraus_sweep(e0=6e6, e_inf=2e6, loss_inf=0.3e6, loss_max=0.9e6, strain_c=0.02, m=0.6):
    from engine.physics.kraus import kraus_loss, kraus_storage

    g = np.logspace(-4, -0.5, 14)
    e1 = kraus_storage(g, e0, e_inf, strain_c, m)
    e2 = kraus_loss(g, loss_inf, loss_max, strain_c, m)
    return np.column_stack([g, e1, e2 / e1, np.full(g.size, 23.0), np.full(g.size, 10.0)])


def test_working_strain_scales_the_dynamic_stiffness_by_the_kraus_ratio():
    # A constant-modulus shear pad: fn = (1/2 pi) sqrt(c k / m) with c = E'(g)/E'(1e-3)
    # of the Kraus (1984) model fitted to the grade's sweep, and T the hysteretic closed
    # form (Snowdon 1968) with eta scaled by eta(g)/eta(1e-3). The static figures stay
    # on the small-strain creep compliance.
    from engine.physics.kraus import amplitude_factors, fit_kraus

    sweep = _kraus_sweep()
    bank = flat_bank([1e6, 1e6], [0.1, 0.1], "shear", ids=["SWEPT", "PLAIN"])
    base = dict(layout="shear", mass_kg=180.0, mounts=4, area_mm2=2000, thickness_mm=10)
    temps = np.array([23.0])
    small = check_mounts(bank, MountDesign(**base), temps, NO2, NO2)
    worked = check_mounts(
        bank,
        MountDesign(**base, working_strain=0.05),
        temps,
        NO2,
        NO2,
        amplitude_sweeps={"SWEPT": sweep},
    )
    fit = fit_kraus(sweep[:, 0], sweep[:, 1], sweep[:, 2])
    c_storage, c_loss = amplitude_factors(fit, 0.05)
    assert 0.3 < c_storage < 0.7 and c_loss > 1.5  # softer and lossier: the Payne effect
    fn0 = small.natural_frequency[0, 0]
    assert worked.natural_frequency[0, 0] == pytest.approx(fn0 * np.sqrt(c_storage), rel=1e-9)
    assert worked.natural_frequency[1, 0] == pytest.approx(small.natural_frequency[1, 0])
    r = 24.7 / worked.natural_frequency[0, 0]
    eta = 0.1 * c_loss
    t_closed = np.sqrt((1 + eta**2) / ((1 - r**2) ** 2 + eta**2))
    assert worked.transmissibility[0, 0, 0] == pytest.approx(t_closed, rel=1e-6)
    assert worked.static_strain[0, 0] == pytest.approx(small.static_strain[0, 0], rel=1e-12)
    assert any(
        n.startswith("at the working strain: amplitude sweep at 23 °C")
        for n in worked.notes["SWEPT"]
    )


def test_a_filled_compound_without_a_sweep_is_noted():
    # 50 Shore A and harder: filled (common practice); small-strain DMA overstates its
    # stiffness at large amplitudes (the Payne effect, Kraus 1984).
    bank = flat_bank([3e6, 3e6], [0.1, 0.1], "tensile", ids=["HARD", "SOFT"])
    res = check_mounts(
        bank,
        MountDesign(area_mm2=2000, thickness_mm=25),
        np.array([23.0]),
        NO2,
        np.array([60.0, 40.0]),
    )
    assert any(n.startswith("filled compound (60 Shore A)") for n in res.notes["HARD"])
    assert not any("filled" in n for n in res.notes.get("SOFT", []))
