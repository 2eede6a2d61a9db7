"""A rigid body on resilient mounts: six degrees of freedom.

The body's motion is ``q = (x, y, z, rx, ry, rz)``: the translation of its centre of
gravity [m] and small rotations about axes through it [rad]. A mount at ``r`` (from the
centre of gravity) moves by ``u = x + theta x r = A q`` with ``A = [I, -[r]x]``; its
three principal stiffnesses act along its compression axis and two directions across it,
so that its 3 x 3 stiffness is ``R diag(k_axial, k_shear, k_shear) R^T`` and its share
of the body's 6 x 6 stiffness ``A^T K A``. Stiffnesses may be complex,
``k' (1 + i eta)``: the loss factor of the rubber.

Free vibration: the generalized eigenproblem ``K' phi = omega^2 M phi`` on the real
part (scipy.linalg.eigh). Forced vibration: ``(K* - omega^2 M) q = F`` with the complex
stiffness; the force each mount passes to the ground is ``K*_i A_i q``.

References
----------
Harris, C. M. and Piersol, A. G. (eds.) (2002). Harris' Shock and Vibration Handbook,
5th ed., McGraw-Hill: the chapter on the theory of vibration isolation (rigid body on
resilient supports, coupled modes).
"""

from __future__ import annotations

from typing import NamedTuple

import numpy as np
from numpy.typing import ArrayLike, NDArray

__all__ = [
    "DOF_NAMES",
    "Modes",
    "cross_matrix",
    "mass_matrix",
    "mount_frame",
    "motion_matrix",
    "mount_bases",
    "mount_stiffness_3x3",
    "stiffness_matrix",
    "solve_modes",
    "energy_fractions",
    "forced_response",
    "elastic_centre",
]

DOF_NAMES = ("x", "y", "z", "rx", "ry", "rz")
_TWO_PI = 2.0 * np.pi


def cross_matrix(r: ArrayLike) -> NDArray[np.float64]:
    """The matrix ``[r]x`` with ``[r]x v = r x v``."""
    x, y, z = np.asarray(r, dtype=float)
    return np.array([[0.0, -z, y], [z, 0.0, -x], [-y, x, 0.0]])


def mass_matrix(mass: float, inertia: ArrayLike) -> NDArray[np.float64]:
    """6 x 6 mass matrix of a rigid body, its inertia tensor [kg m2] about its centre of
    gravity (symmetric, positive definite)."""
    inertia = np.asarray(inertia, dtype=float)
    if inertia.shape != (3, 3):
        raise ValueError("the inertia tensor must be 3 x 3")
    if not np.allclose(inertia, inertia.T, rtol=1e-9, atol=1e-12 * np.abs(inertia).max()):
        raise ValueError("the inertia tensor must be symmetric")
    if not (np.isfinite(mass) and mass > 0):
        raise ValueError(f"the mass must be positive, not {mass}")
    if np.linalg.eigvalsh(inertia).min() <= 0:
        raise ValueError("the inertia tensor must be positive definite")
    m = np.zeros((6, 6))
    m[:3, :3] = mass * np.eye(3)
    m[3:, 3:] = inertia
    return m


def mount_frame(axis: ArrayLike) -> NDArray[np.float64]:
    """3 x 3 rotation whose first column is the unit compression axis and whose other two
    columns complete a right-handed frame (the two shear directions)."""
    a = np.asarray(axis, dtype=float)
    norm = np.linalg.norm(a)
    if not (np.isfinite(norm) and norm > 0):
        raise ValueError("a mount axis must be a non-zero vector")
    a = a / norm
    helper = np.array([1.0, 0.0, 0.0]) if abs(a[0]) < 0.9 else np.array([0.0, 1.0, 0.0])
    b = np.cross(a, helper)
    b /= np.linalg.norm(b)
    c = np.cross(a, b)
    return np.column_stack([a, b, c])


def motion_matrix(position: ArrayLike) -> NDArray[np.float64]:
    """3 x 6 matrix ``A = [I, -[r]x]``: the displacement of a point at ``r`` (from the
    centre of gravity) for body motion ``q``."""
    return np.hstack([np.eye(3), -cross_matrix(position)])


def mount_bases(positions: ArrayLike, axes: ArrayLike) -> tuple[NDArray, NDArray]:
    """Per mount the constant 6 x 6 matrices ``P = A^T a a^T A`` and
    ``Q = A^T (I - a a^T) A`` (``a`` the unit axis), so that the body's stiffness is
    ``sum k_axial P + k_shear Q``: the two shear directions of a mount are equally
    stiff, so its 3 x 3 stiffness is ``k_axial a a^T + k_shear (I - a a^T)``."""
    positions = np.atleast_2d(np.asarray(positions, dtype=float))
    axes = np.atleast_2d(np.asarray(axes, dtype=float))
    norms = np.linalg.norm(axes, axis=1)
    if not np.all(np.isfinite(norms) & (norms > 0)):
        raise ValueError("a mount axis must be a non-zero vector")
    unit = axes / norms[:, None]
    motion = np.stack([motion_matrix(r) for r in positions])  # (N, 3, 6)
    along = np.einsum("ni,nj->nij", unit, unit)
    across = np.eye(3)[None] - along
    p = np.einsum("nki,nkl,nlj->nij", motion, along, motion)
    q = np.einsum("nki,nkl,nlj->nij", motion, across, motion)
    return p, q


def stiffness_matrix(
    positions: ArrayLike, axes: ArrayLike, axial: ArrayLike, shear: ArrayLike, bases=None
) -> NDArray:
    """6 x 6 stiffness of the body on its mounts (complex when the stiffnesses are).

    Parameters
    ----------
    positions : array (N, 3) [m]
        Mount positions from the centre of gravity.
    axes : array (N, 3)
        Each mount's compression axis.
    axial, shear : array (..., N) [N/m]
        Each mount's stiffness along its axis and across it (the same in both shear
        directions), real or complex; leading axes give a stack of matrices.
    bases : (P, Q), optional
        :func:`mount_bases` of the layout, computed once for repeated calls.
    """
    p, q = mount_bases(positions, axes) if bases is None else bases
    axial = np.asarray(axial)
    shear = np.asarray(shear)
    return np.einsum("...n,nij->...ij", axial, p) + np.einsum("...n,nij->...ij", shear, q)


def mount_stiffness_3x3(axis: ArrayLike, axial, shear) -> NDArray:
    """A mount's 3 x 3 stiffness in body axes: ``k_axial a a^T + k_shear (I - a a^T)``."""
    a = np.asarray(axis, dtype=float)
    a = a / np.linalg.norm(a)
    along = np.outer(a, a)
    return axial * along + shear * (np.eye(3) - along)


class Modes(NamedTuple):
    """Natural frequencies [Hz] in ascending order and mass-normalised mode shapes
    (columns, ``phi^T M phi = I``)."""

    frequencies: NDArray[np.float64]
    shapes: NDArray[np.float64]


def solve_modes(stiffness: ArrayLike, mass: ArrayLike) -> Modes:
    """The generalized eigenproblem ``K phi = omega^2 M phi``.

    ``stiffness`` may be complex (its real part, the storage stiffness, is used) and may
    be a stack (..., 6, 6) of matrices, solved together. With ``M = L L^T`` (Cholesky)
    the problem becomes the symmetric ``L^-1 K L^-T y = omega^2 y``, ``phi = L^-T y``
    (numpy.linalg.eigh), the same reduction as scipy.linalg.eigh's. A mode without
    stiffness (fewer than six independent mount directions) has frequency 0.
    """
    k = np.real(np.asarray(stiffness))
    k = 0.5 * (k + np.swapaxes(k, -1, -2))
    lower = np.linalg.cholesky(np.asarray(mass, dtype=float))
    inv = np.linalg.inv(lower)
    values, y = np.linalg.eigh(inv @ k @ inv.T)
    values = np.clip(values, 0.0, None)
    return Modes(np.sqrt(values) / _TWO_PI, inv.T @ y)


def energy_fractions(shape: ArrayLike, mass: ArrayLike) -> NDArray[np.float64]:
    """Kinetic-energy fraction of a mode in each of x, y, z, rx, ry, rz.

    ``E_i = phi_i (M phi)_i / (phi^T M phi)``: they sum to 1. With products of inertia
    a rotational entry can be slightly negative (the energy shared between axes); a
    decoupled mode has a single entry of 1 (Harris & Piersol 2002).
    """
    phi = np.asarray(shape, dtype=float)
    mphi = np.asarray(mass, dtype=float) @ phi
    return phi * mphi / float(phi @ mphi)


def forced_response(
    stiffness: ArrayLike, mass: ArrayLike, frequency: float, load: ArrayLike
) -> NDArray[np.complex128]:
    """Complex body motion ``q`` under a harmonic load ``(Fx, Fy, Fz, Mx, My, Mz)`` at
    ``frequency`` [Hz]: ``(K* - omega^2 M) q = F``."""
    omega = _TWO_PI * float(frequency)
    dynamic = np.asarray(stiffness, dtype=complex) - omega**2 * np.asarray(mass, dtype=float)
    from scipy import linalg  # here: scipy.linalg costs ~0.35 s to import

    return linalg.solve(dynamic, np.asarray(load, dtype=complex))


def elastic_centre(positions: ArrayLike, axes: ArrayLike, axial, shear) -> NDArray[np.float64]:
    """The point about which the mounts' translational and rotational stiffness decouple
    best: the least-squares solution ``c`` of ``K_tr [c]x = K_tr_rot`` with ``K_tr`` the
    3 x 3 translational block and the coupling block of the real stiffness taken about
    the centre of gravity. For a layout with a true elastic centre it is exact (a force
    through it only translates the body)."""
    k = np.real(stiffness_matrix(positions, axes, np.real(axial), np.real(shear)))
    ktt, ktr = k[:3, :3], k[:3, 3:]
    # About a point c the coupling block becomes ktr + ktt [c]x; it vanishes when
    # ktt [c]x = -ktr, i.e. [c]x = -ktt^-1 ktr; read c from the skew part.
    skew = -np.linalg.solve(ktt, ktr)
    skew = 0.5 * (skew - skew.T)
    return np.array([skew[2, 1], skew[0, 2], skew[1, 0]])
