"""Mount mechanics: rubber pads in shear or compression carrying a mass.

Pure, vectorised functions: every argument may be a scalar or a numpy array and the
arguments broadcast against each other. Units are SI throughout: modulus [Pa], length
[m], area [m2], mass [kg], frequency [Hz], stiffness [N/m], acceleration [m/s2].

Bad physical arguments (a negative thickness, a hardness off the scale) raise
``ValueError`` with a message naming the argument and the accepted range. NaN entries
are not rejected: they stand for "unknown" and propagate to the result.

The pad is a single-degree-of-freedom isolator: a rigid mass on a massless spring of
complex stiffness ``k* = k'(1 + i eta)`` whose storage stiffness ``k'`` and loss factor
``eta`` may depend on frequency (a viscoelastic material read off its master curve).
"""

from __future__ import annotations

from collections.abc import Callable
from typing import NamedTuple

import numpy as np
from numpy.typing import ArrayLike, NDArray

from engine.physics.shift import LN10

STANDARD_GRAVITY = 9.80665
"""Standard acceleration of gravity [m/s2] (CGPM 1901, exact by definition)."""

STATIC_SHEAR_STRAIN_LIMIT = 0.5
"""Largest long-term static shear strain of a bonded rubber pad [-] (common practice).

Shear strain is the static shear deflection over the rubber thickness. Designers
commonly keep it at or below about 0.5 under the dead load so that creep, bond stress
and fatigue stay moderate; short shocks may go well beyond it.
"""

STATIC_COMPRESSIVE_STRAIN_LIMIT = 0.15
"""Largest long-term static compressive strain of a rubber pad [-] (common practice).

Compressive strain is the static deflection over the unloaded rubber thickness.
Designers commonly keep it at or below about 0.15 under the dead load; beyond it the
force-free faces bulge strongly, creep grows and the linear compression modulus of
Gent & Lindley no longer describes the pad.
"""

STATIC_COMPRESSIVE_STRESS_LIMIT = 1.0e6
"""Largest long-term static compressive stress of a bonded rubber pad [Pa] (common practice).

Stress is the supported weight over the loaded area. Designers commonly keep the dead
load of a bonded compression pad at or below about 1 MPa; well-bonded pads of high shape
factor carry more, unbonded or low shape-factor pads less.
"""

DEFAULT_BULK_MODULUS_PA = 2.0e9
"""Bulk modulus assumed for a rubber whose catalog gives neither ``K`` nor ``nu < 0.5`` [Pa].

Rubbers lie roughly between 1 and 3 GPa; 2 GPa is the value designers commonly take
when nothing better is known (common practice).
"""

HIGH_SHAPE_FACTOR = 10.0
"""Shape factor above which a bonded compression pad is flagged [-] (common practice).

Beyond about 10 the compression modulus ``E (1 + 2 k S^2)`` of a soft rubber is a fifth
of the bulk modulus or more, so rubber's compressibility softens the pad noticeably and
the result depends on a bulk modulus that catalogs rarely state; small errors in ``S``
(bond flash, bulging into holes) also matter most there.
"""

# A compression pad passes the buckling check when its static load is at most this
# share of its critical load (a safety factor of 2; common practice).
BUCKLING_LOAD_SHARE = 0.5

BULK_FROM_CATALOG = "catalog"
"""Source tag of a bulk modulus taken from the catalog column ``bulk_modulus [MPa]``."""
BULK_FROM_POISSON = "poisson_ratio"
"""Source tag of a bulk modulus derived from the catalog's Poisson's ratio and ``E``."""
BULK_DEFAULT = "default"
"""Source tag of a bulk modulus set to `DEFAULT_BULK_MODULUS_PA`."""

# Compression coefficient k of Gent & Lindley against Shore A hardness, as tabulated in
# rubber engineering handbooks. Values from memory; linear interpolation between rows.
_K_FACTOR_HARDNESS = np.array([30.0, 35.0, 40.0, 45.0, 50.0, 55.0, 60.0, 65.0, 70.0, 75.0])
_K_FACTOR_VALUES = np.array([0.93, 0.89, 0.85, 0.80, 0.73, 0.64, 0.57, 0.54, 0.53, 0.52])

_TWO_PI = 2.0 * np.pi
NEWTON_SETTLED = 1e-13  # [decades] a Newton step this small has reached the root to rounding


class NaturalFrequency(NamedTuple):
    """Natural frequency of a mount with frequency-dependent stiffness.

    Attributes
    ----------
    frequency : array [Hz]
        The natural frequency, NaN where no root was found.
    converged : array of bool
        True where a root was found inside the search bracket.
    """

    frequency: NDArray[np.float64]
    converged: NDArray[np.bool_]


class BulkModulus(NamedTuple):
    """Bulk modulus of each grade and where it came from.

    Attributes
    ----------
    value : array [Pa]
        Bulk modulus ``K``.
    source : array of str
        Per grade one of `BULK_FROM_CATALOG`, `BULK_FROM_POISSON`, `BULK_DEFAULT`, so
        that a note can say which value was used.
    """

    value: NDArray[np.float64]
    source: NDArray[np.str_]


def _as_float(name: str, value: ArrayLike) -> NDArray[np.float64]:
    try:
        return np.asarray(value, dtype=float)
    except (TypeError, ValueError) as exc:
        raise ValueError(f"{name} must be a number or an array of numbers; got {value!r}") from exc


def _positive(name: str, value: ArrayLike, unit: str) -> NDArray[np.float64]:
    array = _as_float(name, value)
    bad = array <= 0
    if np.any(bad):
        first = array[bad].flat[0]
        raise ValueError(f"{name} must be positive [{unit}]; got {first:g}")
    return array


def _non_negative(name: str, value: ArrayLike, unit: str) -> NDArray[np.float64]:
    array = _as_float(name, value)
    bad = array < 0
    if np.any(bad):
        first = array[bad].flat[0]
        raise ValueError(f"{name} must be zero or positive [{unit}]; got {first:g}")
    return array


def _poisson(value: ArrayLike) -> NDArray[np.float64]:
    array = _as_float("poisson_ratio", value)
    bad = (array <= -1.0) | (array > 0.5)
    if np.any(bad):
        first = array[bad].flat[0]
        raise ValueError(
            f"poisson_ratio must lie in (-1, 0.5] for an isotropic solid; got {first:g}"
        )
    return array


# --- shape factor and compression modulus -------------------------------------------


def shape_factor_disc(diameter: ArrayLike, thickness: ArrayLike) -> NDArray[np.float64]:
    """Shape factor of a bonded circular disc loaded on its faces.

    Parameters
    ----------
    diameter : array [m]
        Disc diameter.
    thickness : array [m]
        Rubber thickness between the bonded plates.

    Returns
    -------
    array [-]
        Shape factor ``S``.

    Notes
    -----
    ``S`` = one loaded area / force-free (bulging) area
    = (pi D^2 / 4) / (pi D h) = D / (4 h).

    References
    ----------
    Gent, A. N. and Lindley, P. B. (1959). The compression of bonded rubber blocks.
    Proc. Inst. Mech. Eng. 173, 111-122.
    """
    d = _positive("diameter", diameter, "m")
    h = _positive("thickness", thickness, "m")
    return d / (4.0 * h)


def shape_factor_block(
    length: ArrayLike, width: ArrayLike, thickness: ArrayLike
) -> NDArray[np.float64]:
    """Shape factor of a bonded rectangular block loaded on its faces.

    Parameters
    ----------
    length, width : array [m]
        Sides of the loaded (bonded) face.
    thickness : array [m]
        Rubber thickness between the bonded plates.

    Returns
    -------
    array [-]
        Shape factor ``S``.

    Notes
    -----
    ``S`` = one loaded area / force-free area = L W / (2 h (L + W)).
    A square of side ``L`` gives ``S = L / (4 h)``.

    References
    ----------
    Gent, A. N. and Lindley, P. B. (1959). Proc. Inst. Mech. Eng. 173, 111-122.
    """
    a = _positive("length", length, "m")
    b = _positive("width", width, "m")
    h = _positive("thickness", thickness, "m")
    return a * b / (2.0 * h * (a + b))


def compression_modulus(
    youngs_modulus: ArrayLike, shape_factor: ArrayLike, k_factor: ArrayLike
) -> NDArray[np.float64]:
    """Effective compression modulus of a bonded rubber block.

    Parameters
    ----------
    youngs_modulus : array [Pa]
        Young's (tensile) modulus ``E`` of the rubber; for a dynamic calculation the
        storage modulus ``E'`` at the frequency and temperature of interest.
    shape_factor : array [-]
        Shape factor ``S`` (see `shape_factor_disc`, `shape_factor_block`).
    k_factor : array [-]
        Material compression coefficient ``k`` (about 0.5 to 1; see
        `k_factor_from_hardness`).

    Returns
    -------
    array [Pa]
        Compression modulus ``Ec``.

    Notes
    -----
    ``Ec = E (1 + 2 k S^2)``. The bulk compressibility of rubber, which caps ``Ec`` at
    large shape factors (above about 10), is not included here: see
    `bulk_limited_compression_modulus`.

    References
    ----------
    Gent, A. N. and Lindley, P. B. (1959). Proc. Inst. Mech. Eng. 173, 111-122.
    """
    e = _positive("youngs_modulus", youngs_modulus, "Pa")
    s = _non_negative("shape_factor", shape_factor, "-")
    k = _non_negative("k_factor", k_factor, "-")
    return e * (1.0 + 2.0 * k * s**2)


def bulk_limited_compression_modulus(
    compression_modulus: ArrayLike, bulk_modulus: ArrayLike
) -> NDArray[np.float64]:
    """Compression modulus of a bonded block with rubber's bulk compressibility.

    Parameters
    ----------
    compression_modulus : array [Pa]
        Compression modulus ``Ec`` of an incompressible block (see
        `compression_modulus`).
    bulk_modulus : array [Pa]
        Bulk modulus ``K`` of the rubber (see `bulk_modulus_for_grade`); ``inf`` means
        incompressible and returns ``Ec`` unchanged.

    Returns
    -------
    array [Pa]
        Effective compression modulus ``Ec,eff``.

    Raises
    ------
    ValueError
        If a modulus is not positive (NaN entries propagate).

    Notes
    -----
    The shape (bulging) deformation and the volume change act as springs in series:
    ``1 / Ec,eff = 1 / Ec + 1 / K``. Always ``Ec,eff < min(Ec, K)``; ``Ec,eff -> K`` as
    the shape factor grows without bound and ``Ec,eff ~ Ec`` while ``Ec << K``
    (shape factors below about 3 for soft rubbers). Since ``Ec = E (1 + 2 k S^2)`` and
    ``K`` is about 2 GPa, the correction matters above a shape factor of about 10
    (`HIGH_SHAPE_FACTOR`).

    References
    ----------
    Gent, A. N. and Lindley, P. B. (1959). Proc. Inst. Mech. Eng. 173, 111-122.
    Gent, A. N. (ed.) (2012). Engineering with Rubber, 3rd ed. Hanser.
    """
    ec = _positive("compression_modulus", compression_modulus, "Pa")
    k = _positive("bulk_modulus", bulk_modulus, "Pa")
    return ec / (1.0 + ec / k)  # the same formula, exact for K = inf


def bulk_modulus_for_grade(
    bulk_modulus_mpa: ArrayLike,
    poisson_ratio: ArrayLike,
    youngs_modulus: ArrayLike,
    default: float = DEFAULT_BULK_MODULUS_PA,
) -> BulkModulus:
    """Bulk modulus of each grade from what its catalog row gives.

    Parameters
    ----------
    bulk_modulus_mpa : array [MPa]
        Catalog value ``bulk_modulus [MPa]``; NaN (or None) where blank.
    poisson_ratio : array [-]
        Catalog Poisson's ratio ``nu`` in (-1, 0.5]; NaN where blank.
    youngs_modulus : array [Pa]
        Young's modulus ``E`` that the catalog ``nu`` goes with (for a dynamic check the
        storage modulus ``E'`` at the operating point); NaN where unknown.
    default : float [Pa], default `DEFAULT_BULK_MODULUS_PA` (2 GPa)
        Value used where neither a bulk modulus nor a usable ``nu`` is given.

    Returns
    -------
    BulkModulus
        ``value`` [Pa] and ``source`` per grade, with the broadcast shape of the inputs.

    Raises
    ------
    ValueError
        If a catalog bulk modulus or ``E`` is not positive, ``nu`` lies outside
        (-1, 0.5], or ``default`` is not positive.

    Notes
    -----
    In order of preference:

    1. the catalog bulk modulus, converted from MPa (`BULK_FROM_CATALOG`);
    2. where ``nu < 0.5`` and ``E`` are known, the isotropic relation
       ``K = E / (3 (1 - 2 nu))`` (`BULK_FROM_POISSON`);
    3. otherwise ``default`` (`BULK_DEFAULT`): ``nu = 0.5`` says only "incompressible
       enough", which gives no finite ``K``.

    ``K`` from ``nu`` is very sensitive near 0.5 (``nu = 0.499`` and ``E = 3 MPa`` give
    500 MPa, ``nu = 0.4999`` gives 5 GPa), so a catalog ``K`` is worth having.

    References
    ----------
    Timoshenko, S. P. and Goodier, J. N. (1970). Theory of Elasticity, 3rd ed.
    Gent, A. N. (ed.) (2012). Engineering with Rubber, 3rd ed. Hanser.
    """
    catalog = _positive("bulk_modulus", bulk_modulus_mpa, "MPa")
    nu = _poisson(poisson_ratio)
    e = _positive("youngs_modulus", youngs_modulus, "Pa")
    fallback = float(_positive("default", default, "Pa"))
    catalog, nu, e = np.broadcast_arrays(catalog, nu, e)
    from_catalog = ~np.isnan(catalog)
    from_poisson = ~from_catalog & (nu < 0.5) & np.isfinite(e)
    denominator = np.where(from_poisson, 3.0 * (1.0 - 2.0 * nu), 1.0)
    value = np.where(from_catalog, catalog * 1e6, np.where(from_poisson, e / denominator, fallback))
    source = np.where(
        from_catalog, BULK_FROM_CATALOG, np.where(from_poisson, BULK_FROM_POISSON, BULK_DEFAULT)
    )
    return BulkModulus(value=value.astype(float), source=source)


def is_high_shape_factor(
    shape_factor: ArrayLike, limit: float = HIGH_SHAPE_FACTOR
) -> NDArray[np.bool_]:
    """Flag compression pads whose shape factor calls for a warning.

    Parameters
    ----------
    shape_factor : array [-]
        Shape factor ``S`` of each pad; NaN (unknown) is not flagged.
    limit : float [-], default `HIGH_SHAPE_FACTOR` (10)
        Shape factor above which the pad is flagged (common practice).

    Returns
    -------
    array of bool
        True where ``S > limit``: the stiffness then leans on the bulk modulus
        (see `bulk_limited_compression_modulus`) and on an exact shape factor.

    Raises
    ------
    ValueError
        If a shape factor is negative or ``limit`` is not positive.
    """
    s = _non_negative("shape_factor", shape_factor, "-")
    threshold = float(_positive("limit", limit, "-"))
    return np.asarray(s > threshold)


def youngs_modulus_from_hardness(shore_a: ArrayLike) -> NDArray[np.float64]:
    """Young's modulus of a rubber estimated from its Shore A hardness.

    Parameters
    ----------
    shore_a : array [Shore A]
        Indentation hardness; must lie in [0, 100).

    Returns
    -------
    array [Pa]
        Estimated Young's modulus ``E`` (Shore A 50 gives about 2.46 MPa).

    Raises
    ------
    ValueError
        If a hardness lies outside [0, 100).

    Notes
    -----
    ``E [MPa] = 0.0981 (56 + 7.62336 S) / (0.137505 (254 - 2.54 S))`` with ``S`` the
    Shore A hardness: the indentation theory of Gent for the standard durometer. The
    relation is an estimate valid roughly from 20 to 90 Shore A; it is undefined at
    100 and loses meaning towards both ends of the scale, where measured moduli should
    be used instead.

    References
    ----------
    Gent, A. N. (1958). On the relation between indentation hardness and Young's
    modulus. Trans. Inst. Rubber Ind. 34, 46-57.
    """
    s = _as_float("shore_a", shore_a)
    bad = (s < 0.0) | (s >= 100.0)
    if np.any(bad):
        first = s[bad].flat[0]
        raise ValueError(f"Shore A hardness must lie in [0, 100); got {first:g}")
    e_mpa = 0.0981 * (56.0 + 7.62336 * s) / (0.137505 * (254.0 - 2.54 * s))
    return e_mpa * 1e6


def hardness_from_youngs_modulus(youngs_modulus: ArrayLike) -> NDArray[np.float64]:
    """Shore A hardness a rubber of Young's modulus ``E`` would read: the inverse of
    `youngs_modulus_from_hardness` (the same indentation relation of Gent 1958).

    Parameters
    ----------
    youngs_modulus : array [Pa]
        Young's modulus, positive.

    Returns
    -------
    array [Shore A]
        ``S = (0.137505 * 254 E - 0.0981 * 56) / (0.0981 * 7.62336 + 0.137505 * 2.54 E)``
        with ``E`` in MPa; below 0 for moduli under about 0.16 MPa (clip before use) and
        tending to 100 as ``E`` grows.

    Examples
    --------
    >>> float(np.round(hardness_from_youngs_modulus(youngs_modulus_from_hardness(50.0)), 9))
    50.0
    """
    e = _positive("youngs_modulus", youngs_modulus, "Pa") * 1e-6
    return (0.137505 * 254.0 * e - 0.0981 * 56.0) / (0.0981 * 7.62336 + 0.137505 * 2.54 * e)


def k_factor_from_hardness(shore_a: ArrayLike) -> NDArray[np.float64]:
    """Compression coefficient ``k`` of a rubber from its Shore A hardness.

    Parameters
    ----------
    shore_a : array [Shore A]
        Indentation hardness, within the tabulated range 30 to 75.

    Returns
    -------
    array [-]
        ``k`` for `compression_modulus`, linearly interpolated in the table.

    Raises
    ------
    ValueError
        If a hardness lies outside the table (30 to 75 Shore A).

    Notes
    -----
    Table of ``k`` against hardness as given by Gent & Lindley and rubber engineering
    handbooks (values from memory): 30: 0.93, 35: 0.89, 40: 0.85, 45: 0.80, 50: 0.73,
    55: 0.64, 60: 0.57, 65: 0.54, 70: 0.53, 75: 0.52. ``k`` falls with hardness
    because filled, harder compounds deviate more from the ideal neo-Hookean block.

    References
    ----------
    Gent, A. N. and Lindley, P. B. (1959). Proc. Inst. Mech. Eng. 173, 111-122.
    """
    s = _as_float("shore_a", shore_a)
    low, high = _K_FACTOR_HARDNESS[0], _K_FACTOR_HARDNESS[-1]
    bad = (s < low) | (s > high)
    if np.any(bad):
        first = s[bad].flat[0]
        raise ValueError(
            f"k factor is tabulated for Shore A {low:g} to {high:g} only; got {first:g}"
        )
    return np.interp(s, _K_FACTOR_HARDNESS, _K_FACTOR_VALUES)


def shear_from_youngs(
    youngs_modulus: ArrayLike, poisson_ratio: ArrayLike = 0.5
) -> NDArray[np.float64]:
    """Shear modulus from Young's modulus of an isotropic solid.

    Parameters
    ----------
    youngs_modulus : array [Pa]
        Young's modulus ``E`` (or storage modulus ``E'``).
    poisson_ratio : array [-], default 0.5
        Poisson's ratio ``nu`` in (-1, 0.5]; 0.5 for an incompressible rubber.

    Returns
    -------
    array [Pa]
        ``G = E / (2 (1 + nu))``.

    References
    ----------
    Timoshenko, S. P. and Goodier, J. N. (1970). Theory of Elasticity, 3rd ed.
    """
    e = _positive("youngs_modulus", youngs_modulus, "Pa")
    nu = _poisson(poisson_ratio)
    return e / (2.0 * (1.0 + nu))


def youngs_from_shear(
    shear_modulus: ArrayLike, poisson_ratio: ArrayLike = 0.5
) -> NDArray[np.float64]:
    """Young's modulus from the shear modulus of an isotropic solid.

    Parameters
    ----------
    shear_modulus : array [Pa]
        Shear modulus ``G`` (or storage modulus ``G'``).
    poisson_ratio : array [-], default 0.5
        Poisson's ratio ``nu`` in (-1, 0.5].

    Returns
    -------
    array [Pa]
        ``E = 2 G (1 + nu)``.

    References
    ----------
    Timoshenko, S. P. and Goodier, J. N. (1970). Theory of Elasticity, 3rd ed.
    """
    g = _positive("shear_modulus", shear_modulus, "Pa")
    nu = _poisson(poisson_ratio)
    return 2.0 * g * (1.0 + nu)


# --- pad stiffness ------------------------------------------------------------------


def shear_pad_stiffness(
    shear_modulus: ArrayLike, area: ArrayLike, thickness: ArrayLike
) -> NDArray[np.float64]:
    """Stiffness of a rubber pad loaded in simple shear.

    Parameters
    ----------
    shear_modulus : array [Pa]
        Shear (storage) modulus ``G``.
    area : array [m2]
        Bonded area of one face.
    thickness : array [m]
        Rubber thickness.

    Returns
    -------
    array [N/m]
        ``k = G A / h``; bending of thick pads (h comparable to the width) is ignored.

    References
    ----------
    Gent, A. N. (ed.) (2012). Engineering with Rubber, 3rd ed., Hanser.
    """
    g = _positive("shear_modulus", shear_modulus, "Pa")
    a = _positive("area", area, "m2")
    h = _positive("thickness", thickness, "m")
    return g * a / h


def compression_pad_stiffness(
    compression_modulus: ArrayLike,
    area: ArrayLike,
    thickness: ArrayLike,
    bulk_modulus: ArrayLike | None = None,
) -> NDArray[np.float64]:
    """Stiffness of a bonded rubber pad loaded in compression.

    Parameters
    ----------
    compression_modulus : array [Pa]
        Compression modulus ``Ec`` of the incompressible block (see
        `compression_modulus`).
    area : array [m2]
        Loaded area of one face.
    thickness : array [m]
        Rubber thickness.
    bulk_modulus : array [Pa], optional
        Bulk modulus ``K`` (see `bulk_modulus_for_grade`). When given, ``Ec`` is first
        limited by it as in `bulk_limited_compression_modulus`; when omitted the rubber
        is taken as incompressible.

    Returns
    -------
    array [N/m]
        ``k = Ec A / h``, or ``k = Ec,eff A / h`` with ``1 / Ec,eff = 1 / Ec + 1 / K``
        (small strains).

    References
    ----------
    Gent, A. N. and Lindley, P. B. (1959). Proc. Inst. Mech. Eng. 173, 111-122.
    """
    ec = _positive("compression_modulus", compression_modulus, "Pa")
    a = _positive("area", area, "m2")
    h = _positive("thickness", thickness, "m")
    if bulk_modulus is not None:
        ec = bulk_limited_compression_modulus(ec, bulk_modulus)
    return ec * a / h


def buckling_load(
    youngs_modulus: ArrayLike,
    area: ArrayLike,
    thickness: ArrayLike,
    shape_factor: ArrayLike,
    k_factor: ArrayLike,
    second_moment_ratio: ArrayLike = 1.0 / (4.0 * np.pi),
    poisson_ratio: ArrayLike = 0.5,
) -> NDArray[np.float64]:
    """Critical compressive load of a bonded rubber pad, with its shear flexibility.

    Parameters
    ----------
    youngs_modulus : array [Pa]
        Young's modulus E of the rubber (the long-term one for a static load).
    area, thickness : array [m2], [m]
        Loaded area and rubber thickness of the pad.
    shape_factor, k_factor : array
        Shape factor S and the Gent-Lindley coefficient k of the pad.
    second_moment_ratio : array
        I / A^2 of the pad's section: 1 / (4 pi) for a disc (the default), 1 / 12 for
        a square.
    poisson_ratio : array
        Of the rubber, for G = E / (2 (1 + nu)); 0.5 by default.

    Returns
    -------
    array [N]
        ``P_cr = (P_S / 2) (sqrt(1 + 4 P_E / P_S) - 1)``: the column buckling load of a
        pad with both faces bonded to plates that stay parallel, its Euler load
        ``P_E = pi^2 E_b I / h^2`` taken with the bending modulus
        ``E_b = E (1 + (2/3) k S^2)`` and its shear stiffness ``P_S = G A`` (Haringx
        1948; Gent 1964). For a short pad (``P_E >> P_S``) it tends to
        ``sqrt(P_S P_E)``; for a slender one (``P_E << P_S``) to ``P_E``. It is always
        below both ``P_E`` and ``sqrt(P_S P_E)``.

    References
    ----------
    Haringx, J. A. (1948). Philips Res. Rep. 3, 401-449.
    Gent, A. N. (1964). Elastic stability of rubber compression springs. J. Mech.
    Eng. Sci. 6, 318-326.

    Examples
    --------
    The shear flexibility lowers the load below the Euler load of the same pad:

    >>> e, h = 3.0e6, 0.02
    >>> a = 0.04 ** 2 * np.pi / 4.0  # a 40 mm disc, S = 0.5
    >>> p = buckling_load(e, a, h, 0.5, 0.73)
    >>> euler = np.pi**2 * e * (1 + 2 / 3 * 0.73 * 0.25) * a**2 / (4 * np.pi) / h**2
    >>> bool(p < euler)
    True
    """
    e = _positive("youngs_modulus", youngs_modulus, "Pa")
    a = _positive("area", area, "m2")
    h = _positive("thickness", thickness, "m")
    s = _non_negative("shape_factor", shape_factor, "")
    k = _positive("k_factor", k_factor, "")
    nu = _poisson(poisson_ratio)
    e_bend = e * (1.0 + (2.0 / 3.0) * k * s**2)
    euler = np.pi**2 * e_bend * np.asarray(second_moment_ratio, dtype=float) * a**2 / h**2
    shear = e / (2.0 * (1.0 + nu)) * a
    return 0.5 * shear * (np.sqrt(1.0 + 4.0 * euler / shear) - 1.0)


# --- dynamics -----------------------------------------------------------------------


def transmissibility(
    frequency: ArrayLike, storage_stiffness: ArrayLike, loss_factor: ArrayLike, mass: ArrayLike
) -> NDArray[np.float64]:
    """Force (or motion) transmissibility of a mass on a viscoelastic mount.

    Parameters
    ----------
    frequency : array [Hz]
        Excitation frequency ``f``.
    storage_stiffness : array [N/m]
        Storage stiffness ``k'`` at each frequency (and temperature).
    loss_factor : array [-]
        Loss factor ``eta`` of the mount at each frequency.
    mass : array [kg]
        Supported mass per mount.

    Returns
    -------
    array [-]
        ``T``: ratio of transmitted to applied amplitude; ``inf`` at the resonance of an
        undamped mount.

    Notes
    -----
    ``T = |k*| / |k* - m (2 pi f)^2|`` with ``k* = k' (1 + i eta)``. With ``k'`` and
    ``eta`` evaluated at each ``f`` this is the transmissibility of the "rubberlike"
    isolator of Snowdon; with constant values it reduces to
    `hysteretic_transmissibility`.

    References
    ----------
    Snowdon, J. C. (1968). Vibration and Shock in Damped Mechanical Systems. Wiley.
    Harris, C. M. and Piersol, A. G. (eds.) (2002). Harris' Shock and Vibration
    Handbook, 5th ed., ch. 30 (vibration isolation). McGraw-Hill.
    """
    f = _non_negative("frequency", frequency, "Hz")
    k = _positive("storage_stiffness", storage_stiffness, "N/m")
    eta = _non_negative("loss_factor", loss_factor, "-")
    m = _positive("mass", mass, "kg")
    # |k*| and |k* - m w^2| from their real and imaginary parts (as numpy's abs of a
    # complex number, without the complex arrays).
    k_loss = k * eta
    with np.errstate(divide="ignore", invalid="ignore"):
        return np.hypot(k, k_loss) / np.hypot(k - m * (_TWO_PI * f) ** 2, k_loss)


def hysteretic_transmissibility(
    frequency_ratio: ArrayLike, loss_factor: ArrayLike
) -> NDArray[np.float64]:
    """Transmissibility of a constant-stiffness isolator with hysteretic damping.

    Parameters
    ----------
    frequency_ratio : array [-]
        ``r = f / fn``.
    loss_factor : array [-]
        Constant loss factor ``eta``.

    Returns
    -------
    array [-]
        ``T = sqrt((1 + eta^2) / ((1 - r^2)^2 + eta^2))``; ``inf`` at ``r = 1`` when
        ``eta = 0``.

    References
    ----------
    Snowdon, J. C. (1968). Vibration and Shock in Damped Mechanical Systems. Wiley.
    """
    r = _non_negative("frequency_ratio", frequency_ratio, "-")
    eta = _non_negative("loss_factor", loss_factor, "-")
    with np.errstate(divide="ignore"):
        return np.sqrt((1.0 + eta**2) / ((1.0 - r**2) ** 2 + eta**2))


def amplification_at_resonance(loss_factor: ArrayLike) -> NDArray[np.float64]:
    """Transmissibility at ``r = 1`` of a hysteretically damped isolator.

    Parameters
    ----------
    loss_factor : array [-]
        Loss factor ``eta`` at resonance; must be positive.

    Returns
    -------
    array [-]
        ``sqrt(1 + eta^2) / eta`` (close to ``1/eta`` for light damping).

    References
    ----------
    Snowdon, J. C. (1968). Vibration and Shock in Damped Mechanical Systems. Wiley.
    """
    eta = _positive("loss_factor", loss_factor, "-")
    return np.sqrt(1.0 + eta**2) / eta


def isolation_onset_frequency(natural_frequency: ArrayLike) -> NDArray[np.float64]:
    """Frequency above which a hysteretically damped mount isolates (``T < 1``).

    Parameters
    ----------
    natural_frequency : array [Hz]
        Natural frequency ``fn``.

    Returns
    -------
    array [Hz]
        ``sqrt(2) fn``. With a constant loss factor ``T = 1`` exactly at
        ``r = sqrt(2)`` whatever ``eta`` is; with a frequency-dependent ``k'`` this is
        an estimate.

    References
    ----------
    Snowdon, J. C. (1968). Vibration and Shock in Damped Mechanical Systems. Wiley.
    """
    fn = _positive("natural_frequency", natural_frequency, "Hz")
    return np.sqrt(2.0) * fn


def static_deflection(
    mass: ArrayLike, stiffness: ArrayLike, g: float = STANDARD_GRAVITY
) -> NDArray[np.float64]:
    """Static deflection of a mount under the weight of its mass.

    Parameters
    ----------
    mass : array [kg]
        Supported mass per mount.
    stiffness : array [N/m]
        Static (long-time, low-frequency) stiffness of the mount.
    g : float [m/s2], default 9.80665
        Acceleration of gravity.

    Returns
    -------
    array [m]
        ``delta = m g / k``.
    """
    m = _positive("mass", mass, "kg")
    k = _positive("stiffness", stiffness, "N/m")
    return m * _positive("g", g, "m/s2") / k


def natural_frequency_from_deflection(
    deflection: ArrayLike, g: float = STANDARD_GRAVITY
) -> NDArray[np.float64]:
    """Natural frequency of a linear spring-mass system from its static deflection.

    Parameters
    ----------
    deflection : array [m]
        Static deflection ``delta`` under the weight of the mass.
    g : float [m/s2], default 9.80665
        Acceleration of gravity.

    Returns
    -------
    array [Hz]
        ``fn = (1 / 2 pi) sqrt(g / delta)`` (15.76 Hz at 1 mm). Rubber is stiffer
        dynamically than statically, so a real pad runs above this estimate.

    References
    ----------
    Harris, C. M. and Piersol, A. G. (eds.) (2002). Harris' Shock and Vibration
    Handbook, 5th ed., ch. 2. McGraw-Hill.
    """
    d = _positive("deflection", deflection, "m")
    return np.sqrt(_positive("g", g, "m/s2") / d) / _TWO_PI


def _bracket(f_low: float, f_high: float) -> tuple[float, float]:
    if not (np.isfinite(f_low) and np.isfinite(f_high) and 0.0 < f_low < f_high):
        raise ValueError(
            f"search bracket must satisfy 0 < f_low < f_high [Hz]; got {f_low:g}, {f_high:g}"
        )
    return float(f_low), float(f_high)


def natural_frequency(
    storage_stiffness_fn: Callable[[NDArray[np.float64]], ArrayLike],
    mass: ArrayLike,
    f_low: float = 1e-3,
    f_high: float = 1e5,
) -> NaturalFrequency:
    """Natural frequency of a mass on a mount whose stiffness depends on frequency.

    Parameters
    ----------
    storage_stiffness_fn : callable
        ``storage_stiffness_fn(frequency) -> k'`` [Hz -> N/m]. It is called once with
        an array of the shape of ``mass`` (to learn its output shape) and then with
        arrays of the broadcast shape of ``mass`` and that output; it must work
        elementwise (entry ``i`` of the result depends on entry ``i`` of the
        frequencies only). It may return a larger shape than ``mass`` (one stiffness
        curve per temperature, say).
    mass : array [kg]
        Supported mass per mount.
    f_low, f_high : float [Hz]
        Search bracket.

    Returns
    -------
    NaturalFrequency
        ``frequency`` [Hz], NaN where no root lies in the bracket (or ``k'`` was not
        positive and finite during the search), and ``converged`` (bool).

    Raises
    ------
    ValueError
        If a mass is not positive or the bracket is not ``0 < f_low < f_high``.

    Notes
    -----
    Solves ``fn = (1 / 2 pi) sqrt(k'(fn) / m)`` as the root in ``x = log10 f`` of
    ``g(x) = x - log10(sqrt(k'(10^x) / m) / (2 pi))`` with scipy's vectorised
    bracketing solver (Chandrupatla's method). The root is unique when
    ``d log k' / d log f < 2``, which holds for any passive viscoelastic solid read
    off a smooth master curve.

    References
    ----------
    Snowdon, J. C. (1968). Vibration and Shock in Damped Mechanical Systems. Wiley.
    Chandrupatla, T. R. (1997). A new hybrid quadratic/bisection algorithm for finding
    the zero of a nonlinear function without using derivatives. Adv. Eng. Software
    28, 145-149.
    """
    m = _positive("mass", mass, "kg")
    low, high = _bracket(f_low, f_high)
    probe = np.asarray(storage_stiffness_fn(np.full(m.shape, low)), dtype=float)
    shape = np.broadcast_shapes(m.shape, probe.shape)
    size = int(np.prod(shape))
    log_mass = np.log10(np.broadcast_to(m, shape))
    index = np.arange(size).reshape(shape)

    def residual(log_f, log_m, idx):
        # find_root hands over only the unsolved entries, flattened; rebuild a
        # full-shape frequency array so that the user's function sees its own shape.
        flat_idx = np.ravel(idx)
        frequency = np.full(size, low)
        frequency[flat_idx] = 10.0 ** np.ravel(log_f)
        k = np.asarray(storage_stiffness_fn(frequency.reshape(shape)), dtype=float)
        k = np.broadcast_to(k, shape).ravel()[flat_idx]
        with np.errstate(divide="ignore", invalid="ignore"):
            g = np.ravel(log_f) - 0.5 * (np.log10(k) - np.ravel(log_m)) + np.log10(_TWO_PI)
        return g.reshape(np.shape(log_f))

    from scipy.optimize import elementwise  # here: scipy.optimize costs ~0.4 s to import

    result = elementwise.find_root(
        residual, (np.log10(low), np.log10(high)), args=(log_mass, index)
    )
    converged = np.asarray(result.success, dtype=bool).reshape(shape)
    frequency = np.where(converged, 10.0 ** np.asarray(result.x).reshape(shape), np.nan)
    return NaturalFrequency(frequency=frequency, converged=converged)


def _reduced_target(shift, log_k, log_m):
    """(log10 aT, right side r, finite) of ``x - log10 E'(10**x) / 2 = r`` per entry, with
    ``r = log10 aT + log10(K / m) / 2 - log10(2 pi)``. An entry without a finite shift or
    stiffness has no root: it gets placeholders (0) and is reported as not converged."""
    rhs = shift + 0.5 * (log_k - log_m) - np.log10(_TWO_PI)
    ok = np.isfinite(rhs)
    return np.where(ok, shift, 0.0), np.where(ok, rhs, 0.0), ok


def natural_frequency_reduced(
    log_storage_fn: Callable[[NDArray[np.float64], NDArray[np.intp]], ArrayLike],
    log_shift: ArrayLike,
    log_stiffness_per_modulus: ArrayLike,
    mass: ArrayLike,
    f_low: float = 1e-3,
    f_high: float = 1e5,
    bulk_softening: ArrayLike | None = None,
) -> NaturalFrequency:
    """Natural frequency of mounts whose stiffness follows a master curve.

    For a thermorheologically simple material the storage stiffness of a pad at
    temperature T is ``k'(f) = K E'(f aT)``: a constant ``K`` of the pad geometry (and
    layout) times the master curve ``E'`` at the reduced frequency. The root is sought
    in the reduced frequency, where the master curve is the same for every temperature.
    With ``bulk_softening`` ``s`` the stiffness is ``k' = K E' / (1 + s E')`` instead: a
    bonded compression pad whose compression modulus ``Ec = c E'`` acts in series with
    the bulk modulus, ``k' = (A / h) Ec / (1 + Ec / K_bulk)``, so ``K = c A / h`` and
    ``s = c / K_bulk`` (see `bulk_limited_compression_modulus`).

    Parameters
    ----------
    log_storage_fn : callable
        ``log_storage_fn(x, index) -> log10 E'(10**x)``: the master curve [log10 Pa] at
        reduced frequencies ``x`` [log10 Hz] for the entries ``index`` (flat indices into
        the broadcast shape of the other arguments); elementwise.
    log_shift : array
        log10 aT of each entry.
    log_stiffness_per_modulus : array
        log10 K [log10 m]: pad stiffness per unit modulus (A/h for a shear pad).
    mass : array [kg]
        Supported mass per mount.
    f_low, f_high : float [Hz]
        Search bracket in real frequency.
    bulk_softening : array [1/Pa], optional
        ``s >= 0`` per entry (broadcast like the other arguments); omitted or 0: the
        stiffness is proportional to ``E'``.

    Returns
    -------
    NaturalFrequency
        ``frequency`` [Hz] with the broadcast shape of the inputs, NaN where no root
        lies in the bracket, and ``converged``.

    Raises
    ------
    ValueError
        If a mass is not positive or the bracket is not ``0 < f_low < f_high``.

    Notes
    -----
    With ``x = log10 fn + log10 aT``, ``fn = (1 / 2 pi) sqrt(K E'(10**x) / m)`` becomes
    ``x - log10 E'(10**x) / 2 = log10 aT + log10(K / m) / 2 - log10(2 pi)``, solved by
    scipy's vectorised bracketing solver (Chandrupatla's method) on the bracket
    ``[log10 f_low + log10 aT, log10 f_high + log10 aT]``. The left side grows with x
    while ``d log E' / d log f < 2`` (any passive viscoelastic solid), so the root is
    unique. The same equation as :func:`natural_frequency`, with the temperature moved
    into the right-hand side. With bulk softening the left side becomes
    ``x - (log10 E' - log10(1 + s E')) / 2``, whose slope is larger still (the series
    spring flattens ``k'`` further), so the root stays unique.

    References
    ----------
    Ferry, J. D. (1980). Viscoelastic Properties of Polymers, 3rd ed., ch. 11 (reduced
    variables). Wiley.
    Chandrupatla, T. R. (1997). Adv. Eng. Software 28, 145-149.
    """
    m = _positive("mass", mass, "kg")
    low, high = _bracket(f_low, f_high)
    shift = np.asarray(log_shift, dtype=float)
    log_k = np.asarray(log_stiffness_per_modulus, dtype=float)
    soft = (
        None if bulk_softening is None else _non_negative("bulk_softening", bulk_softening, "1/Pa")
    )
    shapes = [m.shape, shift.shape, log_k.shape] + ([] if soft is None else [soft.shape])
    shape = np.broadcast_shapes(*shapes)
    shift = np.broadcast_to(shift, shape).ravel()
    log_m = np.broadcast_to(np.log10(m), shape).ravel()
    shift, rhs, ok = _reduced_target(shift, np.broadcast_to(log_k, shape).ravel(), log_m)
    index = np.arange(shift.size)

    if soft is None or not soft.any():

        def residual(x, target, idx):
            return x - 0.5 * np.asarray(log_storage_fn(x, idx), dtype=float) - target

    else:
        softening = np.broadcast_to(soft, shape).ravel()

        def residual(x, target, idx):
            log_e = np.asarray(log_storage_fn(x, idx), dtype=float)
            series = np.log1p(softening[idx] * 10.0**log_e) / np.log(10.0)
            return x - 0.5 * (log_e - series) - target

    from scipy.optimize import elementwise  # here: scipy.optimize costs ~0.4 s to import

    result = elementwise.find_root(
        residual,
        (np.log10(low) + shift, np.log10(high) + shift),
        args=(rhs, index),
        tolerances={"xatol": 1e-12, "xrtol": 0.0},
    )
    converged = np.asarray(result.success, dtype=bool) & ok
    frequency = np.where(converged, 10.0 ** (np.asarray(result.x) - shift), np.nan)
    return NaturalFrequency(frequency=frequency.reshape(shape), converged=converged.reshape(shape))


def natural_frequency_tabulated(
    table_start: ArrayLike,
    table_step: float,
    log_storage_table: ArrayLike,
    table_count: ArrayLike,
    rows: ArrayLike,
    log_shift: ArrayLike,
    log_stiffness_per_modulus: ArrayLike,
    mass: ArrayLike,
    f_low: float = 1e-3,
    f_high: float = 1e5,
    bulk_softening: ArrayLike | None = None,
) -> NaturalFrequency:
    """:func:`natural_frequency_reduced` for master curves given as tables, solved exactly.

    Parameters
    ----------
    table_start : array [log10 Hz]
        Reduced frequency of each table's first node, shape (G,).
    table_step : float [decades]
        Node spacing of every table.
    log_storage_table : array [log10 Pa]
        log10 E' at the nodes, shape (G, W); row g valid in its first ``table_count[g]``.
    table_count : array of int
        Nodes of each table (at least 2), shape (G,).
    rows : array of int
        The table of each entry (broadcast with the arguments after it).
    log_shift, log_stiffness_per_modulus, mass, f_low, f_high, bulk_softening
        As :func:`natural_frequency_reduced`.

    Returns
    -------
    NaturalFrequency
        As :func:`natural_frequency_reduced`, for ``log_storage_fn`` the tables read
        linearly between nodes and along the first and last segments beyond the ends
        (``engine.curves.bank.CurveBank.log_storage_at``).

    Notes
    -----
    The equation ``g(x) = x - h(L(x)) / 2 - r = 0`` of
    :func:`natural_frequency_reduced` (``L`` the table, ``h(L) = L`` or, with bulk
    softening ``s``, ``L - log10(1 + s 10**L)``; ``g`` increases) is solved without an
    iterative search over the whole bracket: a root exists when ``g`` changes sign over
    the bracket; a bisection over the node indices finds the segment holding it; on a
    segment ``L`` is linear, so without softening the root is ``x = (r + (L_i - a x_i)
    / 2) / (1 - a / 2)`` (``a`` the segment's slope) and with softening a safeguarded
    Newton iteration on the segment (``g`` is convex there) reaches it to rounding. The
    result equals the general solver's to its tolerance (``xatol`` 1e-12) and costs
    about a dozen array passes instead of the general solver's thirty or so.
    """
    m = _positive("mass", mass, "kg")
    low, high = _bracket(f_low, f_high)
    start = np.asarray(table_start, dtype=float)
    table = np.asarray(log_storage_table, dtype=float)
    count = np.asarray(table_count, dtype=np.intp)
    parts = [
        np.asarray(rows, dtype=np.intp),
        np.asarray(log_shift, dtype=float),
        np.asarray(log_stiffness_per_modulus, dtype=float),
        np.log10(m),
    ]
    if bulk_softening is not None:
        parts.append(_non_negative("bulk_softening", bulk_softening, "1/Pa"))
    shape = np.broadcast_shapes(*(a.shape for a in parts))
    flat = [np.broadcast_to(a, shape).ravel() for a in parts]
    row, shift, log_k, log_m = flat[:4]
    soft = flat[4] if len(flat) > 4 else None
    if soft is not None and not soft.any():
        soft = None
    shift, rhs, ok = _reduced_target(shift, log_k, log_m)
    width = table.shape[1]
    values = table.ravel()
    first = start[row]
    last_node = count[row] - 1

    every = slice(None)

    def left_side(x, node_low, at_node=None, idx=every):
        """g(x) + r on the segment starting at ``node_low`` (its linear extension beyond
        the table's ends), or at the node itself with ``at_node``; of the entries
        ``idx`` (default all)."""
        base = row[idx] * width + node_low
        if at_node is not None:
            level = np.take(values, base)
        else:
            y0 = np.take(values, base)
            y1 = np.take(values, base + 1)
            level = y0 + (x - (first[idx] + node_low * table_step)) / table_step * (y1 - y0)
        if soft is None:
            return x - 0.5 * level
        with np.errstate(over="ignore"):
            series = np.log1p(soft[idx] * np.exp(LN10 * level)) / LN10
        return x - 0.5 * (level - series)

    def segment_of(x, idx=every):
        pos = np.floor((x - first[idx]) / table_step)
        return np.clip(pos, 0, last_node[idx] - 1).astype(np.intp)

    x_lo = np.log10(low) + shift
    x_hi = np.log10(high) + shift

    # The last node at or left of the root: bisection over node indices (-1: none),
    # started from the nodes either side of the bracket (g rises, so the node at or
    # below x_lo is left of the root and the node past x_hi right of it).
    with np.errstate(invalid="ignore"):
        below = np.where(
            x_lo >= first,
            np.clip(np.floor((x_lo - first) / table_step), -1, last_node),
            -1,
        ).astype(np.intp)
        above = np.clip(np.floor((x_hi - first) / table_step) + 1, 0, last_node + 1)
    above = np.maximum(np.nan_to_num(above, nan=0).astype(np.intp), below + 1)
    above = np.minimum(above, last_node + 1)
    right_of = _node_test(values, width, table_step, row, first, rhs, soft, left_side)
    for _ in range(int(np.ceil(np.log2(width + 1))) + 1):
        open_ = above - below > 1
        if not open_.any():
            break
        mid = (below + above) // 2
        node = np.clip(mid, 0, last_node)
        right_of_root = right_of(node)
        below = np.where(open_ & ~right_of_root, mid, below)
        above = np.where(open_ & right_of_root, mid, above)
    # A root in the bracket: g(x_lo) <= 0 and g(x_hi) >= 0. Where the bisection moved off
    # its first node below, that node has g <= 0 and lies right of x_lo, so g(x_lo) <= 0
    # (g rises); where it found a node with g > 0 at or left of x_hi, g(x_hi) > 0. Only
    # the other entries (a root near or beyond an end of the bracket) are evaluated there.
    with np.errstate(invalid="ignore"):
        at_lo = np.flatnonzero(ok & ((below < 0) | (first + below * table_step <= x_lo)))
        at_hi = np.flatnonzero(ok & ((above > last_node) | (first + above * table_step > x_hi)))
        for at, x_end, inside in ((at_lo, x_lo, np.less_equal), (at_hi, x_hi, np.greater_equal)):
            if at.size:
                x_at = x_end[at]
                g_end = left_side(x_at, segment_of(x_at, at), idx=at) - rhs[at]
                ok[at] &= inside(g_end, 0.0)
    seg = np.clip(below, 0, last_node - 1)
    x0 = first + seg * table_step
    base = row * width + seg
    y0 = np.take(values, base)
    slope = (np.take(values, base + 1) - y0) / table_step
    # Where the root may lie: the segment, or the bracket beyond the table's ends.
    lo = np.where(below >= 0, np.maximum(x0, x_lo), x_lo)
    hi = np.where(below < last_node, np.minimum(x0 + table_step, x_hi), x_hi)
    with np.errstate(divide="ignore", invalid="ignore"):
        x = (rhs + 0.5 * (y0 - slope * x0)) / (1.0 - 0.5 * slope)
    x = np.where(np.isfinite(x), np.clip(x, lo, hi), 0.5 * (lo + hi))
    if soft is not None:
        for _ in range(8):  # Newton on the segment, kept inside [lo, hi] by bisection
            level = y0 + (x - x0) * slope
            with np.errstate(over="ignore"):
                stiff = soft * np.exp(LN10 * level)
            g = x - 0.5 * (level - np.log1p(stiff) / LN10) - rhs
            lo = np.where(g < 0.0, x, lo)
            hi = np.where(g > 0.0, x, hi)
            with np.errstate(divide="ignore", invalid="ignore"):
                step = g / (1.0 - 0.5 * slope / (1.0 + stiff))
                newton = x - step
            inside = np.isfinite(newton) & (newton >= lo) & (newton <= hi)
            moved = np.where(inside, newton, 0.5 * (lo + hi))
            with np.errstate(invalid="ignore"):
                done = not (np.abs(moved - x) > NEWTON_SETTLED).any()
            x = moved
            if done:  # quadratic on a convex segment: settled in three or four steps
                break
    ok &= np.isfinite(x)
    frequency = np.where(ok, np.exp(LN10 * (x - shift)), np.nan)
    return NaturalFrequency(frequency=frequency.reshape(shape), converged=ok.reshape(shape))


def _node_test(values, width, step, row, first, rhs, soft, left_side):
    """The bisection's test of :func:`natural_frequency_tabulated`: a function of node
    indices, true where ``g`` at the node is above zero (the node right of the root).

    ``g(x_i) = x_i - h(L_i) / 2 - r`` with ``h(L) = L - log10(1 + s 10**L) =
    -log10(10**-L + s)``, so ``g(x_i) > 0`` exactly when ``10**-L_i + s > 10**(2 (r -
    x_i))``, and with ``x_i = first + i step`` the right side is ``10**(2 (r - first))``
    times ``10**(-2 step i)``: one exponential per entry and step, no logarithm (the
    logarithmic form costs a power and a log1p). The exponent is held to +-300, which
    changes no outcome while the node factor stays above 1e-280 and the modulus above
    1e-20 Pa (every real one): tables spanning more than 140 decades take the
    logarithmic test instead.
    """
    if 2.0 * step * (width - 1) > 280.0:

        def by_logarithms(node):
            with np.errstate(invalid="ignore"):
                x = first + node * step
                return left_side(x, node, at_node=True) - rhs > 0.0

        return by_logarithms
    node_factor = np.exp(-2.0 * LN10 * step * np.arange(width))
    with np.errstate(over="ignore", invalid="ignore"):
        scale = np.exp(LN10 * np.clip(2.0 * (rhs - first), -300.0, 300.0))
    base = row * width

    def by_products(node):
        left = np.take(values, base + node, mode="clip")
        left *= -LN10
        np.exp(left, out=left)  # 10**-L
        if soft is not None:
            left += soft
        with np.errstate(invalid="ignore"):
            return left > scale * np.take(node_factor, node, mode="clip")

    return by_products


def natural_frequency_scalar(
    storage_stiffness_fn: Callable[[float], float],
    mass: float,
    f_low: float = 1e-3,
    f_high: float = 1e5,
) -> float:
    """Natural frequency of one mass on one mount (scalar form of `natural_frequency`).

    Parameters
    ----------
    storage_stiffness_fn : callable
        ``storage_stiffness_fn(frequency) -> k'`` [Hz -> N/m] for a scalar frequency.
    mass : float [kg]
        Supported mass.
    f_low, f_high : float [Hz]
        Search bracket.

    Returns
    -------
    float [Hz]
        The natural frequency.

    Raises
    ------
    ValueError
        If the mass is not positive, the bracket is invalid, ``k'`` is not positive at
        a bracket end, or no root lies in the bracket.

    Notes
    -----
    Same equation as `natural_frequency`, solved with scipy's Brent method.

    References
    ----------
    Brent, R. P. (1973). Algorithms for Minimization without Derivatives.
    Prentice-Hall.
    """
    m = float(_positive("mass", mass, "kg"))
    low, high = _bracket(f_low, f_high)

    def residual(log_f: float) -> float:
        k = float(storage_stiffness_fn(10.0**log_f))
        if not (np.isfinite(k) and k > 0):
            raise ValueError(
                f"storage stiffness must be positive and finite [N/m]; got {k:g} "
                f"at {10.0**log_f:g} Hz"
            )
        return log_f - 0.5 * np.log10(k / m) + np.log10(_TWO_PI)

    g_low, g_high = residual(np.log10(low)), residual(np.log10(high))
    if np.sign(g_low) == np.sign(g_high):
        raise ValueError(
            f"no natural frequency between {low:g} Hz and {high:g} Hz; widen the bracket"
        )
    from scipy.optimize import brentq

    return float(10.0 ** brentq(residual, np.log10(low), np.log10(high), xtol=1e-14))


# --- sizing -------------------------------------------------------------------------


def size_pad_area(
    target_fn: ArrayLike,
    mass_per_pad: ArrayLike,
    thickness: ArrayLike,
    modulus_at_target: ArrayLike,
) -> NDArray[np.float64]:
    """Pad area giving a target natural frequency when the modulus does not depend on area.

    Parameters
    ----------
    target_fn : array [Hz]
        Wanted natural frequency.
    mass_per_pad : array [kg]
        Mass carried by one pad.
    thickness : array [m]
        Rubber thickness.
    modulus_at_target : array [Pa]
        Modulus at the target frequency and service temperature: ``G'`` for a shear
        pad (or ``Ec`` of a compression pad whose shape factor is held fixed).

    Returns
    -------
    array [m2]
        ``A = m (2 pi fn)^2 h / M``.

    Notes
    -----
    From ``(2 pi fn)^2 = k / m`` and ``k = M A / h``. For a compression disc or square
    whose shape factor grows with area use `size_compression_pad_area`.
    """
    fn = _positive("target_fn", target_fn, "Hz")
    m = _positive("mass_per_pad", mass_per_pad, "kg")
    h = _positive("thickness", thickness, "m")
    modulus = _positive("modulus_at_target", modulus_at_target, "Pa")
    return m * (_TWO_PI * fn) ** 2 * h / modulus


_PAD_SHAPES = ("disc", "square")


def size_compression_pad_area(
    target_fn: ArrayLike,
    mass_per_pad: ArrayLike,
    thickness: ArrayLike,
    youngs_modulus_at_target: ArrayLike,
    k_factor: ArrayLike,
    shape: str = "disc",
    bulk_modulus: ArrayLike | None = None,
) -> NDArray[np.float64]:
    """Loaded area of a compression disc or square giving a target natural frequency.

    Parameters
    ----------
    target_fn : array [Hz]
        Wanted natural frequency.
    mass_per_pad : array [kg]
        Mass carried by one pad.
    thickness : array [m]
        Rubber thickness.
    youngs_modulus_at_target : array [Pa]
        Storage modulus ``E'`` at the target frequency and service temperature.
    k_factor : array [-]
        Compression coefficient ``k``.
    shape : {"disc", "square"}
        Plan form of the pad.
    bulk_modulus : array [Pa], optional
        Bulk modulus ``K`` of the rubber; omitted: incompressible.

    Returns
    -------
    array [m2]
        Loaded area ``A``.

    Raises
    ------
    ValueError
        If ``shape`` is not one of the accepted names, or an argument is out of range.

    Notes
    -----
    The shape factor grows with area: ``S^2 = A / (4 pi h^2)`` for a disc and
    ``S^2 = A / (16 h^2)`` for a square. With ``Ec = E (1 + 2 k S^2)`` the stiffness
    ``k = Ec A / h = (E / h) A + c A^2`` with ``c = E k / (2 pi h^3)`` (disc) or
    ``E k / (8 h^3)`` (square), so ``m (2 pi fn)^2 = (E / h) A + c A^2`` is a
    quadratic in ``A`` with one positive root, taken in the cancellation-free form
    ``A = 2 q / (b + sqrt(b^2 + 4 c q))``, ``b = E / h``, ``q = m (2 pi fn)^2``.

    With a bulk modulus the pad stiffness is ``(A / h) Ec / (1 + Ec / K)``
    (`bulk_limited_compression_modulus`); with ``Ec = E (1 + alpha A)``,
    ``alpha = 2 k S^2 / A``, stiffness ``= q`` becomes ``E alpha A^2 + E (1 - q h alpha / K) A
    - q h (1 + E / K) = 0``, again one positive root (taken in whichever of the two
    algebraically equal forms avoids cancellation). ``K = inf`` gives the form above.
    Check the shape factor of the result: beyond about 10 (`is_high_shape_factor`) the
    stiffness leans on a bulk modulus that catalogs rarely state.

    References
    ----------
    Gent, A. N. and Lindley, P. B. (1959). Proc. Inst. Mech. Eng. 173, 111-122.
    """
    if shape not in _PAD_SHAPES:
        raise ValueError(f"pad shape must be one of {', '.join(_PAD_SHAPES)}; got {shape!r}")
    fn = _positive("target_fn", target_fn, "Hz")
    m = _positive("mass_per_pad", mass_per_pad, "kg")
    h = _positive("thickness", thickness, "m")
    e = _positive("youngs_modulus_at_target", youngs_modulus_at_target, "Pa")
    k = _non_negative("k_factor", k_factor, "-")
    # S^2 = A * shape_coefficient / h^2
    shape_coefficient = 1.0 / (4.0 * np.pi) if shape == "disc" else 1.0 / 16.0
    q = m * (_TWO_PI * fn) ** 2
    if bulk_modulus is None:
        b = e / h
        c = 2.0 * e * k * shape_coefficient / h**3
        return 2.0 * q / (b + np.sqrt(b**2 + 4.0 * c * q))
    inv_k = 1.0 / _positive("bulk_modulus", bulk_modulus, "Pa")  # 0 for K = inf
    alpha = 2.0 * k * shape_coefficient / h**2  # Ec = E (1 + alpha A)
    qa = e * alpha
    qb = e * (1.0 - q * h * alpha * inv_k)
    qc = q * h * (1.0 + e * inv_k)
    root = np.sqrt(qb**2 + 4.0 * qa * qc)
    with np.errstate(divide="ignore", invalid="ignore"):
        return np.where(qb >= 0.0, 2.0 * qc / (qb + root), (root - qb) / (2.0 * qa))
