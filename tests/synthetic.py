"""Sweeps generated from a known model, for round-trip checks of the fitting chain.

The model: a generalized Maxwell series whose weights follow a log-normal distribution
of relaxation times, shifted by WLF above Tg and Arrhenius below it. Everything about it
is known exactly, so a fit to its sweeps can be compared with the truth.
"""

from __future__ import annotations

import numpy as np

from engine.shift import ShiftLaw

TG_C = -20.0
TRUE_LAW = ShiftLaw("WLF+Arrhenius", 0.0, 17.44, 51.6, TG_C, 200e3, TG_C)
TAU = np.logspace(-14, 6, 81)
_W = np.exp(-0.5 * ((np.log10(TAU) + 4.0) / 2.5) ** 2)
WEIGHTS = _W / _W.sum() * 2.0e9  # [Pa]
EQUILIBRIUM = 2.0e6  # [Pa]
FREQUENCIES = np.array([0.1, 0.3, 1.0, 3.0, 10.0, 30.0, 100.0])
TEMPERATURES = np.arange(-60.0, 86.0, 5.0)


def model(temperature, frequency, law: ShiftLaw = TRUE_LAW):
    """(E' [Pa], loss factor) of the known model at temperature [degC], frequency [Hz]."""
    omega = 2 * np.pi * np.asarray(frequency, float) * 10.0 ** law.log_shift(temperature)
    x = omega[..., None] * TAU
    storage = EQUILIBRIUM + np.sum(WEIGHTS * x**2 / (1 + x**2), axis=-1)
    loss = np.sum(WEIGHTS * x / (1 + x**2), axis=-1)
    return storage, loss / storage


def sweep(
    temperatures=TEMPERATURES,
    frequencies=FREQUENCIES,
    noise: float = 0.0,
    seed: int = 7,
    law: ShiftLaw = TRUE_LAW,
) -> np.ndarray:
    """Points (n x 4: degC, Hz, Pa, loss factor) on a DMA grid, with optional noise."""
    t = np.repeat(np.asarray(temperatures, float), len(frequencies))
    f = np.tile(np.asarray(frequencies, float), len(temperatures))
    storage, eta = model(t, f, law)
    if noise:
        rng = np.random.default_rng(seed)
        storage = storage * np.exp(rng.normal(0, noise, storage.size))
        eta = eta * np.exp(rng.normal(0, 2 * noise, eta.size))
    return np.column_stack([t, f, storage, eta])


def write_csv(path, points: np.ndarray, material: str = "SYN-1") -> None:
    """Write points in the import format (MPa)."""
    lines = ["material,temperature [degC],frequency [Hz],storage_modulus [MPa],loss_factor"]
    for t, f, e, eta in points:
        lines.append(f"{material},{t:g},{f:g},{e / 1e6:.6g},{eta:.6g}")
    path.write_text("\n".join(lines) + "\n")


def write_catalog(path, ids=("SYN-1",), mode: str = "tensile") -> None:
    lines = ["id,name,mode,supplier,density [kg/m3],price [per kg],hardness [Shore A]"]
    for i in ids:
        lines.append(f"{i},Synthetic {i},{mode},Nobody,1100,5,50")
    path.write_text("\n".join(lines) + "\n")
