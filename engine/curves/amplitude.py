"""Stiffness and damping at the working strain amplitude, from each grade's amplitude sweep.

A DMA temperature/frequency sweep is run at a small strain (about 0.1 %); a filled rubber
in a mount works at a larger one and is softer there, and usually damps more (the Payne
effect). Where a grade has a strain-amplitude sweep, :func:`amplitude_corrections` fits
the Kraus (1984) model to it (:mod:`engine.physics.kraus`) and gives the factors that
carry the grade's small-strain storage modulus and loss factor to the working amplitude.
A sweep that cannot be fitted gives a note for its grade instead of a correction; it
never stops the others.

Sweep arrays are those of ``Library.amplitude_sweeps``: one row per point, columns
strain amplitude [-], storage modulus [Pa], loss factor [-], temperature [degC],
frequency [Hz].
"""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass

import numpy as np

from engine.physics.kraus import REFERENCE_STRAIN, KrausFit, amplitude_factors, fit_kraus

__all__ = ["AmplitudeCorrection", "amplitude_corrections", "POOR_FIT_RMS", "SWEEP_COLUMNS"]

SWEEP_COLUMNS = ("strain", "storage_modulus", "loss_factor", "temperature", "frequency")
# rms natural-log residual above which a fit is said to follow its sweep poorly (about
# 10 % scatter about the model, five times the noise of a good DMA sweep): our choice.
POOR_FIT_RMS = 0.10


@dataclass(frozen=True)
class AmplitudeCorrection:
    """How a grade's small-strain values change at the working strain amplitude.

    Parameters
    ----------
    storage_factor : float [-]
        E'(working) / E'(reference strain): multiplies the small-strain storage modulus.
    loss_factor_factor : float [-]
        eta(working) / eta(reference strain): multiplies the small-strain loss factor.
    working_strain : float [-]
        The working strain amplitude the factors are for.
    temp_C : float [degC]
        Temperature of the amplitude sweep (mean of its points).
    freq_Hz : float [Hz]
        Frequency of the amplitude sweep (mean of its points).
    fit : KrausFit
        The Kraus model fitted to the sweep.
    source : str
        One line for reasons and reports, e.g. ``"amplitude sweep at 23 °C, 10 Hz: E'
        x0.62, loss factor x1.35 at strain 0.05"``.
    extrapolated : bool
        True when the working or the reference strain lies outside the swept strains.
    """

    storage_factor: float
    loss_factor_factor: float
    working_strain: float
    temp_C: float
    freq_Hz: float
    fit: KrausFit
    source: str
    extrapolated: bool = False


def _correction(
    sweep: np.ndarray, working_strain: float, symbol: str
) -> tuple[AmplitudeCorrection, list[str]]:
    """The correction of one grade and its notes; ValueError if the sweep cannot be fitted."""
    points = np.asarray(sweep, dtype=float)
    if points.ndim != 2 or points.shape[1] != len(SWEEP_COLUMNS):
        raise ValueError(
            f"an amplitude sweep has {len(SWEEP_COLUMNS)} columns "
            f"({', '.join(SWEEP_COLUMNS)}), this one has shape {points.shape}"
        )
    strain, storage, eta, temp, freq = points.T
    fit = fit_kraus(strain, storage, eta)
    storage_factor, eta_factor = amplitude_factors(fit, working_strain, REFERENCE_STRAIN)
    temp_C, freq_Hz = float(np.mean(temp)), float(np.mean(freq))
    lo, hi = float(strain.min()), float(strain.max())
    notes = []
    outside = [
        f"{what} {value:g}"
        for what, value in (
            ("working strain", working_strain),
            ("reference strain", REFERENCE_STRAIN),
        )
        if not lo <= value <= hi
    ]
    if outside:
        notes.append(
            f"{' and '.join(outside)} outside the swept strains {lo:g} to {hi:g}: "
            "the amplitude factors are extrapolated by the Kraus fit"
        )
    if fit.rms_log_residual > POOR_FIT_RMS:
        notes.append(
            f"the Kraus model follows the amplitude sweep poorly "
            f"({100 * fit.rms_log_residual:.0f} % rms scatter); factors used as fitted"
        )
    source = (
        f"amplitude sweep at {temp_C:.0f} °C, {freq_Hz:.3g} Hz: {symbol} x{storage_factor:.2f}, "
        f"loss factor x{eta_factor:.2f} at strain {working_strain:g}"
    )
    correction = AmplitudeCorrection(
        storage_factor=float(storage_factor),
        loss_factor_factor=float(eta_factor),
        working_strain=float(working_strain),
        temp_C=temp_C,
        freq_Hz=freq_Hz,
        fit=fit,
        source=source,
        extrapolated=bool(outside),
    )
    return correction, notes


def amplitude_corrections(
    sweeps: Mapping[str, np.ndarray],
    working_strain: float,
    modes: Mapping[str, str] | None = None,
) -> tuple[dict[str, AmplitudeCorrection], dict[str, list[str]]]:
    """Kraus-model corrections to the working strain amplitude, grade by grade.

    Parameters
    ----------
    sweeps : mapping of str to ndarray
        Grade id -> amplitude sweep, n x 5 (strain [-], storage modulus [Pa], loss
        factor [-], temperature [degC], frequency [Hz]), as ``Library.amplitude_sweeps``
        gives them.
    working_strain : float [-]
        Dynamic strain amplitude in service, positive (0.05 for 5 %), in the mode of
        each grade's data (tensile strain for tensile grades, shear strain for shear).
    modes : mapping of str to str, optional
        Grade id -> ``"tensile"`` or ``"shear"``; only names the modulus in the source
        text (E' or G'). E' when not given.

    Returns
    -------
    corrections : dict of str to AmplitudeCorrection
        One per grade whose sweep could be fitted.
    notes : dict of str to list of str
        Per grade, the reason its sweep was not used, or that the factors are
        extrapolated beyond the swept strains, or that the fit is poor. Grades without
        anything to say are absent.

    Raises
    ------
    ValueError
        A working strain that is not a positive finite number (one bad grade never
        raises: it gets a note).

    Examples
    --------
    >>> from engine.physics.kraus import kraus_loss, kraus_storage
    >>> g = np.logspace(-4, -0.5, 12)
    >>> e1 = kraus_storage(g, 6e6, 2e6, 0.02, 0.6)
    >>> e2 = kraus_loss(g, 0.3e6, 0.9e6, 0.02, 0.6)
    >>> sweep = np.column_stack([g, e1, e2 / e1, np.full(12, 23.0), np.full(12, 10.0)])
    >>> found, notes = amplitude_corrections({"A": sweep, "B": sweep[:3]}, 0.05)
    >>> print(found["A"].source)
    amplitude sweep at 23 °C, 10 Hz: E' x0.51, loss factor x3.26 at strain 0.05
    >>> notes["B"]
    ['amplitude sweep not used: a Kraus fit needs at least 5 measured points, the sweep has 3']
    """
    if not (np.isfinite(working_strain) and working_strain > 0):
        raise ValueError(f"the working strain amplitude must be positive, not {working_strain}")
    corrections: dict[str, AmplitudeCorrection] = {}
    notes: dict[str, list[str]] = {}
    for grade, sweep in sweeps.items():
        symbol = "G'" if modes is not None and modes.get(grade) == "shear" else "E'"
        try:
            correction, said = _correction(sweep, float(working_strain), symbol)
        except ValueError as exc:
            notes[grade] = [f"amplitude sweep not used: {exc}"]
            continue
        corrections[grade] = correction
        if said:
            notes[grade] = said
    return corrections, notes
