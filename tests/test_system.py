"""Six-degree-of-freedom mount systems: the rigid body on its mounts against closed forms.

Closed forms for a rigid body on resilient supports: Harris, C. M. and Piersol, A. G.
(eds.) (2002), Harris' Shock and Vibration Handbook, 5th ed., the chapter on the theory
of vibration isolation (decoupled modes of a symmetric layout with the centre of gravity
in the mount plane; the coupled lateral-rocking pair when it lies above the plane).
"""

from __future__ import annotations

import numpy as np
import pytest
from scipy.spatial.transform import Rotation

from engine.base.errors import CriteriaError
from engine.curves.bank import CurveBank
from engine.curves.mastercurve import build_master_curve
from engine.curves.mountcheck import MountDesign, check_mounts
from engine.curves.system import Disturbance, MountSystem, SystemMount, solve_system
from engine.physics import mount
from engine.physics import rigidbody as rb
from tests import synthetic

TWO_PI = 2.0 * np.pi


class FlatProps:
    def __init__(self, storage, eta, shape):
        self.storage_modulus = np.full(shape, storage)
        self.loss_factor = np.full(shape, eta)
        self.extrapolated = np.zeros(shape, dtype=bool)


class FlatCurve:
    """A modulus independent of temperature and frequency (tensile mode)."""

    mode = "tensile"

    def __init__(self, storage=3.0e6, eta=0.1):
        self.storage, self.eta = storage, eta

    def evaluate(self, temperature, frequency):
        shape = np.broadcast(np.asarray(temperature), np.asarray(frequency)).shape
        return FlatProps(self.storage, self.eta, shape)


CATALOG = {"poisson_ratio": None, "hardness": None, "bulk_modulus": None}
E, ETA, K_FACTOR = 3.0e6, 0.1, 0.73
AREA_MM2, H_MM = 1500.0, 20.0


def pad_stiffness(e=E, eta=ETA, area_mm2=AREA_MM2, h_mm=H_MM, k=K_FACTOR):
    """Storage stiffness of one pad along and across its axis [N/m]: Ec = E(1 + 2kS^2)
    (Gent & Lindley 1959) in series with K = 2000 MPa (common practice), G = E/3."""
    a, h = area_mm2 * 1e-6, h_mm * 1e-3
    s = float(mount.shape_factor_disc(np.sqrt(4 * a / np.pi), h))
    ec = e * (1 + 2 * k * s**2)
    ec_eff = 1.0 / (1.0 / ec + 1.0 / mount.DEFAULT_BULK_MODULUS_PA)
    return ec_eff * a / h, e / 3.0 * a / h


def four_mounts(
    a=0.4,
    b=0.3,
    z=0.0,
    cg=(0.0, 0.0, 0.0),
    inertia=((12.0, 0, 0), (0, 18.0, 0), (0, 0, 25.0)),
    mass=180.0,
    **extra,
):
    cg = np.asarray(cg)
    mounts = tuple(
        SystemMount(
            position_m=(float(cg[0] + sx * a), float(cg[1] + sy * b), float(cg[2] + z)),
            area_mm2=AREA_MM2,
            thickness_mm=H_MM,
            k_factor=K_FACTOR,
        )
        for sx in (-1, 1)
        for sy in (-1, 1)
    )
    return MountSystem(mass_kg=mass, inertia_kgm2=inertia, cg_m=tuple(cg), mounts=mounts, **extra)


def test_symmetric_layout_decouples_into_the_closed_form_modes():
    # Harris & Piersol (2002): with the centre of gravity in the mount plane and a
    # symmetric layout, bounce sqrt(sum kz / m), lateral sqrt(sum kx / m), roll
    # sqrt(sum kz y^2 / Ixx), pitch sqrt(sum kz x^2 / Iyy), yaw
    # sqrt(sum kx (x^2 + y^2) / Izz), each over 2 pi.
    a, b, m = 0.4, 0.3, 180.0
    ixx, iyy, izz = 12.0, 18.0, 25.0
    system = four_mounts(a, b, mass=m, inertia=((ixx, 0, 0), (0, iyy, 0), (0, 0, izz)))
    res = solve_system(FlatCurve(), CATALOG, system, [23.0])
    kz, ks = pad_stiffness()
    expected = {
        "bounce": np.sqrt(4 * kz / m),
        "lateral x": np.sqrt(4 * ks / m),
        "lateral y": np.sqrt(4 * ks / m),
        "roll": np.sqrt(4 * kz * b**2 / ixx),
        "pitch": np.sqrt(4 * kz * a**2 / iyy),
        "yaw": np.sqrt(4 * ks * (a**2 + b**2) / izz),
    }
    found = dict(zip(res.names[0], res.frequencies[0], strict=True))
    assert sorted(found) == sorted(expected)
    for name, omega in expected.items():
        assert found[name] == pytest.approx(omega / TWO_PI, rel=1e-9), name
    # each mode decoupled: all its kinetic energy in one axis
    np.testing.assert_allclose(np.sort(res.energy[0], axis=1)[:, -1], 1.0, atol=1e-9)


def test_centre_of_gravity_above_the_plane_couples_lateral_and_rocking():
    # Harris & Piersol (2002), two coupled degrees of freedom x and ry with the mounts
    # a height c below the centre of gravity: m Iyy w^4 - (Kxx Iyy + Kthth m) w^2 +
    # (Kxx Kthth - Kxth^2) = 0 with Kxx = sum kx, Kxth = -c sum kx,
    # Kthth = sum (kx c^2 + kz x^2).
    a, c, m, iyy = 0.4, 0.35, 180.0, 18.0
    system = four_mounts(a, 0.3, z=-c, mass=m, inertia=((12.0, 0, 0), (0, iyy, 0), (0, 0, 25.0)))
    res = solve_system(FlatCurve(), CATALOG, system, [23.0])
    kz, ks = pad_stiffness()
    kxx, kxt, ktt = 4 * ks, -c * 4 * ks, 4 * (ks * c**2 + kz * a**2)
    roots = np.roots([m * iyy, -(kxx * iyy + ktt * m), kxx * ktt - kxt**2])
    expected = np.sort(np.sqrt(roots.real)) / TWO_PI
    coupled = [
        f
        for f, e in zip(res.frequencies[0], res.energy[0], strict=True)
        if e[0] + e[4] > 0.999  # energy in x and ry only
    ]
    np.testing.assert_allclose(np.sort(coupled), expected, rtol=1e-9)
    # truly coupled: both modes share their energy between x and pitch
    shares = [e[0] for e in res.energy[0] if e[0] + e[4] > 0.999]
    assert all(0.01 < s < 0.99 for s in shares)


def test_energy_fractions_sum_to_one_and_rotation_leaves_frequencies():
    # Kinetic energy fractions phi_i (M phi)_i / phi^T M phi sum to 1 (by definition);
    # a layout rotated as a whole (positions, axes and inertia R I R^T) has the same
    # frequencies (common practice: the physics has no preferred axes).
    inertia = np.array([[14.0, 1.5, -0.8], [1.5, 20.0, 0.6], [-0.8, 0.6, 26.0]])
    mounts = [
        SystemMount((0.45, 0.31, -0.2), AREA_MM2, H_MM, axis=(0.2, 0.0, 1.0), k_factor=K_FACTOR),
        SystemMount((-0.38, 0.29, -0.25), AREA_MM2, H_MM, axis=(-0.3, 0.1, 1.0), k_factor=K_FACTOR),
        SystemMount((0.41, -0.33, -0.22), AREA_MM2, H_MM, k_factor=K_FACTOR),
        SystemMount((-0.4, -0.3, -0.18), 1800.0, H_MM, axis=(0.0, -0.2, 1.0), k_factor=K_FACTOR),
    ]
    cg = (0.02, -0.01, 0.1)
    system = MountSystem(180.0, tuple(map(tuple, inertia)), cg, tuple(mounts))
    res = solve_system(FlatCurve(), CATALOG, system, [0.0, 23.0])
    np.testing.assert_allclose(res.energy.sum(axis=2), 1.0, atol=1e-12)
    rot = Rotation.from_euler("xyz", [23.0, -41.0, 77.0], degrees=True).as_matrix()
    turned = [
        SystemMount(
            tuple(rot @ np.asarray(m.position_m)),
            m.area_mm2,
            m.thickness_mm,
            axis=tuple(rot @ np.asarray(m.axis)),
            k_factor=K_FACTOR,
        )
        for m in mounts
    ]
    system2 = MountSystem(
        180.0, tuple(map(tuple, rot @ inertia @ rot.T)), tuple(rot @ np.asarray(cg)), tuple(turned)
    )
    res2 = solve_system(FlatCurve(), CATALOG, system2, [0.0, 23.0])
    np.testing.assert_allclose(res2.frequencies, res.frequencies, rtol=1e-9)


def _fitted_curve():
    points = synthetic.sweep(
        np.arange(-30.0, 81.0, 10.0), np.array([1.0, 3.0, 10.0, 30.0, 100.0]), noise=0.0
    )
    return build_master_curve(points, "tensile")


def test_a_single_vertical_mount_equals_the_one_pad_mount_check():
    # One pad under the centre of gravity: the bounce mode is the one-pad mount check's
    # fn (both iterate the stiffness at the natural frequency of the same master curve).
    curve = _fitted_curve()
    temps = np.array([-10.0, 23.0, 50.0])
    design = MountDesign(
        layout="compression",
        mass_kg=45.0,
        mounts=1,
        area_mm2=AREA_MM2,
        thickness_mm=H_MM,
        k_factor=K_FACTOR,
    )
    one = check_mounts(
        CurveBank.from_curves({"G": curve}), design, temps, np.array([np.nan]), np.array([np.nan])
    )
    system = MountSystem(
        45.0,
        ((0.5, 0, 0), (0, 0.5, 0), (0, 0, 0.5)),
        (0.0, 0.0, 0.0),
        (SystemMount((0.0, 0.0, 0.0), AREA_MM2, H_MM, k_factor=K_FACTOR),),
    )
    res = solve_system(curve, CATALOG, system, temps)
    for i in range(temps.size):
        bounce = res.frequencies[i][res.names[i].index("bounce")]
        assert bounce == pytest.approx(one.natural_frequency[0, i], rel=1e-4)


def test_forced_bounce_matches_the_hysteretic_transmissibility():
    # A vertical force through the centre of gravity of a symmetric layout drives bounce
    # alone: T = sqrt((1 + eta^2) / ((1 - r^2)^2 + eta^2)) (Snowdon 1968), with r = f/fn.
    system = four_mounts(
        disturbances=(Disturbance(force_N=(0, 0, 100.0), frequency_Hz=(24.7, 40.0)),)
    )
    res = solve_system(FlatCurve(eta=ETA), CATALOG, system, [23.0])
    fn = res.frequencies[0][res.names[0].index("bounce")]
    eta = ETA
    for k, f in enumerate((24.7, 40.0)):
        r = f / fn
        closed = np.sqrt((1 + eta**2) / ((1 - r**2) ** 2 + eta**2))
        assert res.transmissibility[0][0, k] == pytest.approx(closed, rel=1e-9)
        # the four mounts share the force equally
        np.testing.assert_allclose(res.mount_forces[0][0, k], closed * 100.0 / 4, rtol=1e-9)


def test_a_mode_near_the_disturbance_fails_with_its_name_and_temperature():
    # Any mode within sqrt(2) below the disturbance fails the isolation onset (Snowdon
    # 1968: T < 1 needs f/fn > sqrt(2)); a stiffer rubber puts bounce (19 Hz), roll
    # (22 Hz) and pitch (24 Hz) there, while the soft one (bounce 13.5 Hz) passes. The
    # closest two are named, the rest counted.
    system = four_mounts(disturbances=(Disturbance(frequency_Hz=(24.7,)),))
    assert solve_system(FlatCurve(3.0e6), CATALOG, system, [23.0]).passes
    res = solve_system(FlatCurve(6.0e6), CATALOG, system, [-10.0, 23.0])
    fails = res.failures()
    assert not res.passes and fails
    assert fails[0].startswith("pitch mode 24.1 Hz at -10 °C, within √2 of 24.7 Hz")
    assert fails[1].startswith("roll mode 22.1 Hz")
    assert fails[2] == "1 more mode(s) too close or too stiff"
    assert fails[3].startswith("amplifies disturbance 1: T = ")
    for f in fails:
        if "(f/fn = " in f:
            ratio = float(f.split("(f/fn = ")[1].rstrip(")"))
            assert ratio < np.sqrt(2.0)


def test_case_file_refusals_are_plain():
    good = {
        "mass_kg": 180,
        "inertia_kgm2": [[12, 0, 0], [0, 18, 0], [0, 0, 25]],
        "cg_m": [0, 0, 0.3],
        "mounts": [{"position_m": [0.4, 0.3, 0], "area_mm2": 1500, "thickness_mm": 20}],
    }
    assert MountSystem.from_dict(good).mounts[0].axis == (0.0, 0.0, 1.0)
    cases = [
        ({"mass_kg": -1}, "mass_kg must be a positive number"),
        ({"inertia_kgm2": [[1, 0], [0, 1]]}, "inertia_kgm2 must be 3 rows"),
        ({"inertia_kgm2": [[1, 2, 0], [0, 1, 0], [0, 0, 1]]}, "symmetric"),
        ({"cg_m": [0, 0]}, "cg_m must be a list of 3 numbers"),
        ({"mounts": []}, "mounts must be a non-empty list"),
        ({"mounts": [{"position_m": [0, 0, 0], "area_mm2": 0, "thickness_mm": 20}]}, "area_mm2"),
        (
            {
                "mounts": [
                    {"position_m": [0, 0, 0], "area_mm2": 10, "thickness_mm": 20, "axis": [0, 0, 0]}
                ]
            },
            "axis",
        ),
        ({"disturbances": [{"force_N": [0, 0, 0]}]}, "non-zero force_N or moment_Nm"),
        ({"disturbances": [{"rpm": [1480], "harmonics": [0]}]}, "harmonics"),
        ({"colour": 1}, "colour"),
    ]
    for change, message in cases:
        with pytest.raises(CriteriaError, match=message):
            MountSystem.from_dict({**good, **change})


def test_disturbance_rpm_and_harmonics():
    # f = rpm / 60 x order (common practice).
    d = Disturbance.from_dict({"rpm": [1480], "harmonics": [1, 2], "force_N": [0, 0, 50]}, "d")
    np.testing.assert_allclose(d.frequencies, [1480 / 60, 2 * 1480 / 60])


def test_elastic_centre_of_a_symmetric_layout_is_its_centre():
    # A symmetric layout's elastic centre is its geometric centre (common practice).
    pos = np.array([[sx * 0.4, sy * 0.3, -0.2] for sx in (-1, 1) for sy in (-1, 1)])
    axes = np.tile([0.0, 0.0, 1.0], (4, 1))
    centre = rb.elastic_centre(pos, axes, np.full(4, 2e6), np.full(4, 5e5))
    np.testing.assert_allclose(centre, [0.0, 0.0, -0.2], atol=1e-12)
