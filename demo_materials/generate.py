"""Write the invented demo data set of quietgrade: ``catalog.csv`` and ``sweeps.csv``.

Every grade, supplier and number in this data set is invented. The sweeps are computed
from documented physical models of linear viscoelasticity (below), then multiplied by
seeded log-normal measurement noise, so that the files look like dynamic mechanical
(DMA) results but belong to no real material. They must not be used for design.

Run ``python demo_materials/generate.py`` to rewrite both files next to this script, or
``python demo_materials/generate.py --check`` to exit with status 1 when the committed
files differ from what the script would write.

The script uses numpy only and does not import the quietgrade engine, so the data stay
independent of the fitting code that is tested against them.

Model, per grade (all parameters in the table ``GRADE_MODELS``)
----------------------------------------------------------------
Complex modulus at temperature T [degC] and frequency f [Hz], in the grade's own mode
(E* for tensile grades, G* for shear grades)::

    x      = 2 pi f aT(T) tau_main                      (reduced angular frequency x tau)
    E_u*   = E_g - E_r - dE_tail + dE_beta CC(2 pi f tau_beta(T); beta_alpha)
    E_net* = E_r + dE_tail CC(x 10**tail_offset; tail_alpha) + E_u* HN(x; alpha, beta)
    E*     = 1 / (1/E_net* + 1/(E_r (i 2 pi f tau_flow(T))**flow_alpha))      (TPE only)

with the Havriliak-Negami relaxation in modulus form HN(x) = 1 - 1/(1 + (i x)**a)**b,
its Cole-Cole special case CC(x) = HN(x; a, b=1), E_g the unrelaxed (glassy) modulus
of the main relaxation, E_r the relaxed (rubbery) modulus and dE_tail = tail_strength
E_r a weak, broad relaxation in the rubbery zone (the slow loss of filled rubbers).
tau_main is set so that the loss factor of the main relaxation peaks at 1 Hz at
T = t_glass; t_glass is therefore the grade's Tg by the loss-factor-peak method at 1 Hz
(the secondary relaxation and the flow element move the peak of the data by a few K at
most). The Havriliak-Negami and Cole-Cole forms are continuous distributions of
relaxation times, i.e. generalized Maxwell models with a continuum of elements.

Shift factor of the main relaxation (thermorheologically simple, continuous at Tg)::

    log10 aT = -C1 (T - Tg) / (C2 + T - Tg)                       for T >= Tg  (WLF)
    log10 aT = Ea / (ln(10) R) (1/(T + 273.15) - 1/(Tg + 273.15))  for T < Tg   (Arrhenius)

The secondary (beta) relaxation and the flow element each follow their own Arrhenius
law, with tau = 1/(2 pi 1 Hz) at beta_temp and at flow_temp respectively.

How each grade is measured (the plans in ``GRIDS``)
---------------------------------------------------
- Set-point sweeps: a frequency sweep at each isotherm; every point is written with the
  set-point of its isotherm (whole degrees).
- Logged temperatures (``SweepGrid.log``): the same sweeps, but every point carries the
  specimen temperature the instrument logged for it::

      T = T_set + clip(offset + lag (T_set - 23 degC) + drift u (k/(n-1) - 1/2)
                       + jitter N(0, 1), -0.4 K, +0.4 K)

  with u uniform in [-1, 1] once per isotherm (a slow drift across its sweep), k the
  place of the point in the sweep of n frequencies and the reading noise drawn per
  point; T is rounded to the instrument's 1 or 2 decimals.
- Temperature ramp (``TemperatureRamp``): the instrument heats at a fixed rate and
  takes its few frequencies in turn, a fixed time on each point; a point's temperature
  is the ramp temperature half-way through it plus reading noise, so no two points
  share a temperature.
- Sparse sheet: a set-point grid with three frequencies at 10 K steps.

The model is evaluated at the temperature as written, so every row is consistent.

Measurement noise: storage modulus and loss factor are each multiplied by
exp(sigma N(0, 1)) with a per-lab sigma (1-2 % on the modulus, 2-3 % on the loss
factor). Each grade draws from its own generator ``numpy.random.default_rng([SEED,
k])``, k its position in the catalog, in this order: logged-temperature noise (if any),
modulus noise, loss-factor noise. Values are written with 5 significant digits.

References
----------
Williams, M. L., Landel, R. F. and Ferry, J. D. (1955). The temperature dependence of
relaxation mechanisms in amorphous polymers and other glass-forming liquids. J. Am.
Chem. Soc. 77, 3701-3707.
Arrhenius, S. (1889). Z. Phys. Chem. 4, 226-248 (rate law used for the shift below Tg
and for the secondary and flow relaxations).
Ferry, J. D. (1980). Viscoelastic Properties of Polymers, 3rd ed., Wiley, New York
(generalized Maxwell model, relaxation spectra, family Tg ranges; recalled from memory).
Havriliak, S. and Negami, S. (1967). A complex plane representation of dielectric and
mechanical relaxation processes in some polymers. Polymer 8, 161-210 (from memory).
Cole, K. S. and Cole, R. H. (1941). Dispersion and absorption in dielectrics.
J. Chem. Phys. 9, 341-351 (from memory).
"""

from __future__ import annotations

import argparse
import csv
import io
import sys
from dataclasses import dataclass
from pathlib import Path

import numpy as np

HERE = Path(__file__).resolve().parent
CATALOG_NAME = "catalog.csv"
SWEEPS_NAME = "sweeps.csv"

SEED = 20_611_031
"""Seed of the noise generator; change it and the committed files change."""

GAS_CONSTANT = 8.314_462_618
"""Molar gas constant R [J/(mol K)] (CODATA 2018)."""

KELVIN_OFFSET = 273.15
"""0 degC in K."""

SIGNIFICANT_DIGITS = 5

CATALOG_COLUMNS = (
    "id",
    "name",
    "mode",
    "supplier",
    "family",
    "density [kg/m3]",
    "price [per kg]",
    "hardness [Shore A]",
    "service_min [degC]",
    "service_max [degC]",
    "poisson_ratio",
    "notes",
)

SWEEP_COLUMNS = (
    "material",
    "temperature [degC]",
    "frequency [Hz]",
    "storage_modulus [MPa]",
    "loss_factor",
)


@dataclass(frozen=True)
class TemperatureLog:
    """How the logged specimen temperature strays from the set-point of each isotherm.

    Parameters
    ----------
    offset : float [K]
        Steady offset of the specimen sensor from the set-point.
    lag : float [K/K]
        Offset of the specimen from the set-point per kelvin away from ``ROOM``; negative
        means the specimen falls a little short of the set-point, more so at the ends of
        the range.
    drift : float [K]
        Largest change of the specimen temperature across one isotherm's frequency sweep;
        each isotherm drifts by ``drift`` times a uniform number in [-1, 1].
    jitter : float [K]
        Standard deviation of the reading noise of each point.
    decimals : int
        Decimals the instrument writes.
    """

    offset: float
    lag: float
    drift: float
    jitter: float
    decimals: int


@dataclass(frozen=True)
class SweepGrid:
    """Isotherms of one laboratory's DMA sweeps: a frequency sweep at each set-point.

    Parameters
    ----------
    temperatures : tuple of int [degC]
        Set-points of the isotherms, ascending.
    frequencies : tuple of str [Hz]
        Frequencies as they are written to the file, ascending (the order of each sweep).
    modulus_noise : float
        Standard deviation of the natural log of the storage-modulus noise factor.
    loss_noise : float
        Standard deviation of the natural log of the loss-factor noise factor.
    log : TemperatureLog or None
        None: the file gives each point the set-point of its isotherm. Otherwise each
        point carries its logged specimen temperature, made as ``log`` says.
    """

    temperatures: tuple[int, ...]
    frequencies: tuple[str, ...]
    modulus_noise: float
    loss_noise: float
    log: TemperatureLog | None = None


@dataclass(frozen=True)
class TemperatureRamp:
    """A temperature ramp measured at a few fixed frequencies taken in turn.

    Parameters
    ----------
    start, stop : float [degC]
        First and last temperature of the ramp.
    rate : float [K/min]
        Heating rate.
    frequencies : tuple of str [Hz]
        Frequencies as they are written to the file, in the order the instrument cycles
        through them.
    seconds : tuple of float [s]
        Time the instrument spends on one point at each frequency; the logged temperature
        of a point is the ramp temperature half-way through it.
    jitter : float [K]
        Standard deviation of the reading noise of each point.
    decimals : int
        Decimals the instrument writes.
    modulus_noise, loss_noise : float
        As in :class:`SweepGrid`.
    """

    start: float
    stop: float
    rate: float
    frequencies: tuple[str, ...]
    seconds: tuple[float, ...]
    jitter: float
    decimals: int
    modulus_noise: float
    loss_noise: float


def _steps(start: int, stop: int, step: int) -> tuple[int, ...]:
    return tuple(range(start, stop + 1, step))


DECADE_1_3 = ("0.1", "0.3", "1", "3", "10", "30", "100")
IN_HOUSE_FREQUENCIES = ("0.3", "1", "3", "10", "30")

ROOM = 23.0
"""Temperature [degC] at which the lag term of a logged isotherm vanishes."""

LOG_LIMIT = 0.4
"""Largest deviation [K] of a logged point from its set-point (the controller's band)."""

# In-house lab: the sensor by the specimen is logged with 2 decimals.
IN_HOUSE_LOG = TemperatureLog(offset=-0.05, lag=-0.0018, drift=0.40, jitter=0.05, decimals=2)
# Fendrel Polymer Works: logged with 1 decimal by their shear-sandwich fixture.
FENDREL_LOG = TemperatureLog(offset=0.10, lag=-0.0015, drift=0.40, jitter=0.07, decimals=1)

# fmt: off
GRIDS: dict[str, SweepGrid | TemperatureRamp] = {
    # Brackwater Elastics: -60..+120 degC in 5 K steps, 0.1..100 Hz, set-points written.
    "brackwater": SweepGrid(_steps(-60, 120, 5), DECADE_1_3, 0.010, 0.020),
    # Brackwater, narrower run for the stiff compound (clamp limit of their fixture).
    "brackwater_narrow": SweepGrid(_steps(-20, 90, 5), DECADE_1_3, 0.010, 0.020),
    # Quillmoor Compounds: coarser grid, 10 K steps at 1, 3, 10 and 30 Hz.
    "quillmoor": SweepGrid(_steps(-60, 120, 10), ("1", "3", "10", "30"), 0.015, 0.025),
    # Quillmoor, newer instrument: a 2 K/min ramp cycling through 1, 3, 10 and 30 Hz;
    # 22 s per cycle, so each frequency comes back every 0.73 K.
    "quillmoor_ramp": TemperatureRamp(
        start=-60.0, stop=120.0, rate=2.0, frequencies=("1", "3", "10", "30"),
        seconds=(9.0, 5.0, 4.0, 4.0), jitter=0.02, decimals=2,
        modulus_noise=0.015, loss_noise=0.025),
    # Quillmoor, one-page data sheet: three frequencies at 10 K steps.
    "quillmoor_sheet": SweepGrid(_steps(-40, 80, 10), ("1", "10", "100"), 0.015, 0.025),
    # Fendrel Polymer Works: shear sandwich, same grid as Brackwater, slightly noisier,
    # logged specimen temperatures.
    "fendrel": SweepGrid(_steps(-60, 120, 5), DECADE_1_3, 0.012, 0.020, FENDREL_LOG),
    # In-house lab: colder start, 0.3..30 Hz, somewhat noisier, logged temperatures.
    "in_house": SweepGrid(_steps(-70, 80, 5), IN_HOUSE_FREQUENCIES, 0.018, 0.030, IN_HOUSE_LOG),
    # In-house lab, run on the glassy reference sheet up to +150 degC.
    "in_house_hot": SweepGrid(
        _steps(-40, 150, 5), IN_HOUSE_FREQUENCIES, 0.018, 0.030, IN_HOUSE_LOG),
}
# fmt: on


@dataclass(frozen=True)
class GradeModel:
    """Viscoelastic model parameters of one invented grade (see the module docstring).

    Parameters
    ----------
    glassy_modulus : float [MPa]
        Unrelaxed modulus E_g of the main (glass-rubber) relaxation.
    rubbery_modulus : float [MPa]
        Relaxed modulus E_r (rubbery plateau).
    alpha, beta : float
        Havriliak-Negami shape exponents of the main relaxation (breadth, asymmetry).
    tail_strength : float
        Strength of the rubbery-zone relaxation as a fraction of E_r.
    tail_alpha : float
        Cole-Cole exponent of the rubbery-zone relaxation (small = very broad).
    tail_offset : float [decades]
        How many decades the rubbery-zone relaxation sits at longer times.
    t_glass : float [degC]
        Tg: loss-factor peak of the main relaxation at 1 Hz; WLF reference temperature.
    c1, c2 : float, [1], [K]
        WLF constants referred to t_glass.
    activation : float [kJ/mol]
        Apparent activation energy of the main relaxation below t_glass.
    beta_strength : float [MPa]
        Strength of the secondary relaxation (0 for none).
    beta_alpha : float
        Cole-Cole exponent of the secondary relaxation.
    beta_temp : float [degC]
        Temperature of the secondary loss-modulus peak at 1 Hz.
    beta_activation : float [kJ/mol]
        Activation energy of the secondary relaxation.
    flow_alpha : float
        Exponent of the series flow element (0 for none).
    flow_temp : float [degC]
        Temperature at which the flow element equals E_r in magnitude at 1 Hz.
    flow_activation : float [kJ/mol]
        Activation energy of the flow element (softening of hard domains).
    grid : str
        Key into ``GRIDS``.
    """

    glassy_modulus: float
    rubbery_modulus: float
    alpha: float
    beta: float
    tail_strength: float
    tail_alpha: float
    tail_offset: float
    t_glass: float
    c1: float
    c2: float
    activation: float
    grid: str
    beta_strength: float = 0.0
    beta_alpha: float = 0.5
    beta_temp: float = 0.0
    beta_activation: float = 80.0
    flow_alpha: float = 0.0
    flow_temp: float = 0.0
    flow_activation: float = 300.0


# One row per grade: the whole physics of the data set. Moduli in MPa (tensile E or
# shear G according to the catalog mode), temperatures in degC, energies in kJ/mol.
# fmt: off
GRADE_MODELS = {
    # natural rubber, soft, lightly filled (Tg by loss-factor peak at 1 Hz)
    "BW-NR40": GradeModel(
        glassy_modulus=2000.0, rubbery_modulus=1.55, alpha=0.62, beta=0.30,
        tail_strength=0.60, tail_alpha=0.25, tail_offset=10.0,
        t_glass=-56.0, c1=16.2, c2=54.0, activation=230.0, grid="brackwater"),
    # natural rubber, harder carbon-black filled in-house compound
    "LAB-NR55": GradeModel(
        glassy_modulus=2300.0, rubbery_modulus=3.3, alpha=0.58, beta=0.30,
        tail_strength=1.30, tail_alpha=0.28, tail_offset=9.5,
        t_glass=-53.0, c1=15.8, c2=56.0, activation=240.0, grid="in_house"),
    # high-damping butyl, shear mode: broad transition (large C2, low alpha)
    "FP-IIR50": GradeModel(
        glassy_modulus=650.0, rubbery_modulus=0.80, alpha=0.38, beta=0.42,
        tail_strength=1.00, tail_alpha=0.28, tail_offset=6.0,
        t_glass=-34.0, c1=13.5, c2=105.0, activation=190.0, grid="fendrel"),
    # butyl, tensile mode, a second supplier's high-damping grade
    "QC-IIR55": GradeModel(
        glassy_modulus=1900.0, rubbery_modulus=2.9, alpha=0.40, beta=0.40,
        tail_strength=1.00, tail_alpha=0.28, tail_offset=6.0,
        t_glass=-31.0, c1=13.0, c2=100.0, activation=200.0, grid="quillmoor_ramp"),
    # chloroprene
    "BW-CR60": GradeModel(
        glassy_modulus=2400.0, rubbery_modulus=4.0, alpha=0.55, beta=0.32,
        tail_strength=0.90, tail_alpha=0.27, tail_offset=8.0,
        t_glass=-33.0, c1=15.0, c2=58.0, activation=250.0, grid="brackwater"),
    # nitrile, medium acrylonitrile
    "BW-NBR65": GradeModel(
        glassy_modulus=2500.0, rubbery_modulus=5.0, alpha=0.52, beta=0.33,
        tail_strength=1.00, tail_alpha=0.28, tail_offset=7.0,
        t_glass=-15.0, c1=14.5, c2=60.0, activation=270.0, grid="brackwater"),
    # silicone: Tg far below the measured range, low damping throughout
    "BW-VMQ50": GradeModel(
        glassy_modulus=1200.0, rubbery_modulus=2.6, alpha=0.60, beta=0.30,
        tail_strength=1.00, tail_alpha=0.27, tail_offset=7.0,
        t_glass=-118.0, c1=14.0, c2=60.0, activation=150.0, grid="brackwater"),
    # polyurethane (polyether type), shear mode
    "FP-PU70": GradeModel(
        glassy_modulus=900.0, rubbery_modulus=1.9, alpha=0.45, beta=0.38,
        tail_strength=1.00, tail_alpha=0.28, tail_offset=6.5,
        t_glass=-22.0, c1=14.0, c2=70.0, activation=240.0, grid="fendrel"),
    # EPDM
    "QC-EPDM60": GradeModel(
        glassy_modulus=2100.0, rubbery_modulus=4.2, alpha=0.55, beta=0.32,
        tail_strength=0.90, tail_alpha=0.27, tail_offset=9.0,
        t_glass=-47.0, c1=15.5, c2=60.0, activation=220.0, grid="quillmoor"),
    # viscoelastic damping polymer for constrained layers, shear mode, high peak loss
    "FP-VL15": GradeModel(
        glassy_modulus=700.0, rubbery_modulus=0.30, alpha=0.60, beta=0.30,
        tail_strength=1.50, tail_alpha=0.32, tail_offset=5.5,
        t_glass=14.0, c1=14.0, c2=60.0, activation=200.0, grid="fendrel"),
    # thermoplastic elastomer (styrenic block type): soft-block Tg, flow near 130 degC
    "BW-TPE45": GradeModel(
        glassy_modulus=1500.0, rubbery_modulus=1.9, alpha=0.55, beta=0.33,
        tail_strength=0.60, tail_alpha=0.25, tail_offset=8.5,
        t_glass=-42.0, c1=15.0, c2=58.0, activation=210.0, grid="brackwater",
        flow_alpha=0.50, flow_temp=128.0, flow_activation=220.0),
    # plasticised vinyl, with a small secondary relaxation well below Tg
    "QC-PVC75": GradeModel(
        glassy_modulus=2600.0, rubbery_modulus=5.5, alpha=0.45, beta=0.38,
        tail_strength=1.00, tail_alpha=0.30, tail_offset=6.0,
        t_glass=5.0, c1=14.5, c2=65.0, activation=280.0, grid="quillmoor_sheet",
        beta_strength=400.0, beta_alpha=0.40, beta_temp=-45.0, beta_activation=60.0),
    # stiff mineral-filled damping compound: Tg above room temperature, high modulus
    "BW-FD30": GradeModel(
        glassy_modulus=3200.0, rubbery_modulus=30.0, alpha=0.42, beta=0.45,
        tail_strength=0.60, tail_alpha=0.26, tail_offset=4.0,
        t_glass=31.0, c1=14.0, c2=62.0, activation=300.0, grid="brackwater_narrow"),
    # glassy thermoplastic (acrylic-like) stiff reference with a secondary relaxation
    "LAB-AC0": GradeModel(
        glassy_modulus=2300.0, rubbery_modulus=1.6, alpha=0.65, beta=0.35,
        tail_strength=0.30, tail_alpha=0.25, tail_offset=3.0,
        t_glass=112.0, c1=13.0, c2=55.0, activation=420.0, grid="in_house_hot",
        beta_strength=1800.0, beta_alpha=0.40, beta_temp=15.0, beta_activation=85.0),
}
# fmt: on

# Catalog rows; None is written as a blank cell (unknown).
# fmt: off
CATALOG = (
    # id, name, mode, supplier, family, density, price, hardness, service min, max,
    # poisson ratio, notes
    ("BW-NR40", "Brackwater BN-40", "tensile", "Brackwater Elastics",
     "natural rubber", 1040, 4.6, 40, -50, 70, 0.4995,
     "soft mount stock; poor oil and ozone resistance"),
    ("LAB-NR55", "In-house NR-55 batch 7", "tensile", "in-house lab",
     "natural rubber", 1120, None, 55, -50, 70, 0.4995,
     "carbon-black filled; lab compound, price not set"),
    ("FP-IIR50", "Fendrel FB-50", "shear", "Fendrel Polymer Works",
     "butyl", 1160, 6.9, 50, -40, 110, 0.4995,
     "high-damping butyl; sheared sandwich specimens"),
    ("QC-IIR55", "Quillmoor QB-55", "tensile", "Quillmoor Compounds",
     "butyl", 1190, 6.2, 55, -40, 110, None,
     "high-damping butyl"),
    ("BW-CR60", "Brackwater BC-60", "tensile", "Brackwater Elastics",
     "chloroprene", 1390, 7.4, 60, -35, 100, 0.4995,
     "moderate oil and good ozone resistance"),
    ("BW-NBR65", "Brackwater BA-65", "tensile", "Brackwater Elastics",
     "nitrile", 1260, 5.8, 65, -30, 100, 0.4995,
     "oil resistant; medium acrylonitrile content"),
    ("BW-VMQ50", "Brackwater BS-50", "tensile", "Brackwater Elastics",
     "silicone", 1170, 18.5, 50, -60, 200, 0.4995,
     "wide service range, low damping"),
    ("FP-PU70", "Fendrel FU-70", "shear", "Fendrel Polymer Works",
     "polyurethane", 1110, 11.0, 70, -40, 80, 0.499,
     "polyether type; sheared sandwich specimens"),
    ("QC-EPDM60", "Quillmoor QE-60", "tensile", "Quillmoor Compounds",
     "EPDM", 1150, 4.9, 60, -45, 130, None,
     "weather and ozone resistant; not for oil"),
    ("FP-VL15", "Fendrel FL-15 layer film", "shear", "Fendrel Polymer Works",
     "damping polymer", 1010, 24.0, None, -20, 70, 0.49,
     "film for constrained-layer treatments; peak damping near room temperature"),
    ("BW-TPE45", "Brackwater BT-45", "tensile", "Brackwater Elastics",
     "TPE", 930, 5.2, 45, -40, 90, 0.49,
     "thermoplastic; softens and creeps above about 100 degC"),
    ("QC-PVC75", "Quillmoor QV-75", "tensile", "Quillmoor Compounds",
     "plasticised vinyl", 1290, 3.1, 75, -10, 60, 0.48,
     "plasticiser migration with some adhesives"),
    ("BW-FD30", "Brackwater BD-30 damping sheet", "tensile", "Brackwater Elastics",
     "filled damping compound", 1820, 8.8, None, 0, 80, 0.45,
     "heavily mineral filled; measured -20 to +90 degC only"),
    ("LAB-AC0", "In-house acrylic reference sheet", "tensile", "in-house lab",
     "glassy thermoplastic", 1190, 3.5, None, -40, 80, 0.37,
     "stiff reference, not a mount material"),
)
# fmt: on


def _log10_shift_main(temperature: np.ndarray, model: GradeModel) -> np.ndarray:
    """Log10 shift factor of the main relaxation: WLF above Tg, Arrhenius below.

    Parameters
    ----------
    temperature : array [degC]
    model : GradeModel

    Returns
    -------
    log_shift : array [1]
        log10 aT, zero at ``model.t_glass``.

    Notes
    -----
    log10 aT = -C1 (T - Tg)/(C2 + T - Tg) for T >= Tg (Williams, Landel and Ferry,
    1955); log10 aT = Ea/(ln 10 R) (1/T - 1/Tg) with T in K below
    Tg (Arrhenius). Both are zero at Tg, so the shift is continuous there.
    """
    dt = temperature - model.t_glass
    wlf = -model.c1 * dt / (model.c2 + np.maximum(dt, 0.0))
    arrhenius = _log10_arrhenius(temperature, model.t_glass, model.activation)
    return np.where(dt >= 0.0, wlf, arrhenius)


def _log10_arrhenius(temperature: np.ndarray, reference: float, activation: float) -> np.ndarray:
    """Log10 Arrhenius shift [1] at ``temperature`` [degC], zero at ``reference`` [degC].

    ``activation`` is the activation energy [kJ/mol].
    """
    inverse = 1.0 / (temperature + KELVIN_OFFSET) - 1.0 / (reference + KELVIN_OFFSET)
    return activation * 1e3 / (np.log(10.0) * GAS_CONSTANT) * inverse


def _havriliak_negami(x: np.ndarray, alpha: float, beta: float) -> np.ndarray:
    """Normalised Havriliak-Negami relaxation in modulus form (0 relaxed, 1 unrelaxed).

    Notes
    -----
    HN(x) = 1 - 1/(1 + (i x)**alpha)**beta with x = omega tau (Havriliak and Negami,
    1967); beta = 1 gives the Cole-Cole form (Cole and Cole, 1941).
    """
    return 1.0 - (1.0 + (1j * x) ** alpha) ** (-beta)


def _main_modulus(
    x: np.ndarray, model: GradeModel, secondary: np.ndarray | float = 0.0
) -> np.ndarray:
    """Complex modulus [MPa] of the main and rubbery-zone relaxations.

    ``x`` is omega aT tau_main; ``secondary`` [MPa] is the complex contribution of the
    secondary relaxation, which adds to the unrelaxed modulus of the main relaxation
    (so that it vanishes, as it should, once the main relaxation has relaxed).
    """
    tail = model.tail_strength * model.rubbery_modulus
    main = model.glassy_modulus - model.rubbery_modulus - tail + secondary
    return (
        model.rubbery_modulus
        + tail * _havriliak_negami(x * 10.0**model.tail_offset, model.tail_alpha, 1.0)
        + main * _havriliak_negami(x, model.alpha, model.beta)
    )


def main_relaxation_time(model: GradeModel) -> float:
    """Relaxation time tau_main [s] at Tg that puts the loss-factor peak at 1 Hz.

    The loss factor of the main and rubbery-zone relaxations depends on x = omega tau
    only; its maximum x* is found on a fine log grid refined by a parabola through the
    three highest points, and tau_main = x*/(2 pi 1 Hz).
    """
    log_x = np.arange(-14.0, 8.0, 0.002)
    modulus = _main_modulus(10.0**log_x, model)
    tan_delta = modulus.imag / modulus.real
    i = int(np.argmax(tan_delta))
    y0, y1, y2 = tan_delta[i - 1 : i + 2]
    step = log_x[1] - log_x[0]
    peak = log_x[i] + 0.5 * step * (y0 - y2) / (y0 - 2.0 * y1 + y2)
    return 10.0**peak / (2.0 * np.pi)


def complex_modulus(
    temperature: np.ndarray, frequency: np.ndarray, model: GradeModel
) -> np.ndarray:
    """Noise-free complex modulus of one grade.

    Parameters
    ----------
    temperature : array [degC]
    frequency : array [Hz]
        Broadcast against ``temperature``.
    model : GradeModel

    Returns
    -------
    modulus : complex array [MPa]
        E* (tensile grades) or G* (shear grades).

    Notes
    -----
    See the module docstring for the equations and their sources.
    """
    omega = 2.0 * np.pi * np.asarray(frequency, dtype=float)
    temperature = np.asarray(temperature, dtype=float)
    x = omega * 10.0 ** _log10_shift_main(temperature, model) * main_relaxation_time(model)
    secondary = 0.0
    if model.beta_strength > 0.0:
        tau = 10.0 ** _log10_arrhenius(temperature, model.beta_temp, model.beta_activation)
        tau = tau / (2.0 * np.pi)
        secondary = model.beta_strength * _havriliak_negami(omega * tau, model.beta_alpha, 1.0)
    modulus = _main_modulus(x, model, secondary)
    if model.flow_alpha > 0.0:
        tau = 10.0 ** _log10_arrhenius(temperature, model.flow_temp, model.flow_activation)
        tau = tau / (2.0 * np.pi)
        flow = model.rubbery_modulus * (1j * omega * tau) ** model.flow_alpha
        modulus = 1.0 / (1.0 / modulus + 1.0 / flow)
    return modulus


def _format(value: float) -> str:
    return f"{value:.{SIGNIFICANT_DIGITS}g}"


def _cell(value: object) -> str:
    if value is None:
        return ""
    if isinstance(value, float):
        return f"{value:g}"
    return str(value)


def _csv_text(header: tuple[str, ...], rows: list[tuple[str, ...]]) -> str:
    buffer = io.StringIO()
    writer = csv.writer(buffer, lineterminator="\n")
    writer.writerow(header)
    writer.writerows(rows)
    return buffer.getvalue()


def catalog_text() -> str:
    """Text of ``catalog.csv``."""
    rows = [tuple(_cell(value) for value in row) for row in CATALOG]
    return _csv_text(CATALOG_COLUMNS, rows)


def _isotherm_points(grid: SweepGrid, rng: np.random.Generator) -> tuple[np.ndarray, ...]:
    """Points of an isotherm grid, in the order the instrument takes them.

    Parameters
    ----------
    grid : SweepGrid
    rng : numpy.random.Generator
        Draws the logged-temperature noise (nothing is drawn without a log).

    Returns
    -------
    temperature : array [degC]
        Temperature of each point as written (rounded to the written decimals).
    text : array of str
        The same temperatures as they are written to the file.
    labels : array of str [Hz]
        Frequency of each point as it is written to the file.

    Notes
    -----
    Without a temperature log every point carries its set-point. With one, a point's
    temperature is the set-point plus ``offset + lag (set-point - ROOM)``, plus the
    isotherm's drift times the point's place in its sweep (-1/2 first, +1/2 last),
    plus reading noise; the deviation is held within ``LOG_LIMIT`` and the sum rounded
    to the logged decimals.
    """
    count = len(grid.frequencies)
    set_point = np.repeat(np.array(grid.temperatures, dtype=float), count)
    labels = np.tile(np.array(grid.frequencies), len(grid.temperatures))
    log = grid.log
    if log is None:
        return set_point, np.array([f"{t:g}" for t in set_point]), labels
    place = np.tile(np.linspace(-0.5, 0.5, count), len(grid.temperatures))
    drift = np.repeat(log.drift * rng.uniform(-1.0, 1.0, len(grid.temperatures)), count)
    deviation = (
        log.offset
        + log.lag * (set_point - ROOM)
        + drift * place
        + log.jitter * rng.standard_normal(set_point.size)
    )
    deviation = np.clip(deviation, -LOG_LIMIT, LOG_LIMIT)
    temperature = np.round(set_point + deviation, log.decimals) + 0.0  # no "-0.00"
    text = np.array([f"{t:.{log.decimals}f}" for t in temperature])
    return temperature, text, labels


def _ramp_points(ramp: TemperatureRamp, rng: np.random.Generator) -> tuple[np.ndarray, ...]:
    """Points of a temperature ramp, in the order the instrument takes them.

    Parameters
    ----------
    ramp : TemperatureRamp
    rng : numpy.random.Generator
        Draws the reading noise of the temperatures.

    Returns
    -------
    temperature, text, labels
        As for :func:`_isotherm_points`.

    Raises
    ------
    ValueError
        If two points would share a temperature (reading noise too large for the
        spacing of the points).

    Notes
    -----
    The instrument takes the frequencies in turn, ``seconds`` on each point, for as many
    whole cycles as fit between ``start`` and ``stop``; a point's temperature is the
    ramp temperature half-way through it plus reading noise, rounded to the logged
    decimals.
    """
    seconds = np.array(ramp.seconds, dtype=float)
    per_second = ramp.rate / 60.0
    cycles = int((ramp.stop - ramp.start) / (per_second * seconds.sum()))
    durations = np.tile(seconds, cycles)
    middle = np.cumsum(durations) - 0.5 * durations
    temperature = ramp.start + per_second * middle
    temperature = temperature + ramp.jitter * rng.standard_normal(temperature.size)
    temperature = np.round(temperature, ramp.decimals) + 0.0
    if np.any(np.diff(temperature) <= 0.0):
        raise ValueError("ramp points must have strictly rising temperatures")
    text = np.array([f"{t:.{ramp.decimals}f}" for t in temperature])
    return temperature, text, np.tile(np.array(ramp.frequencies), cycles)


def grade_rng(index: int, seed: int = SEED) -> np.random.Generator:
    """Noise generator of the grade at catalog position ``index`` (0 for the first).

    Each grade has its own stream, so changing how one grade is measured leaves the
    numbers of every other grade as they are.
    """
    return np.random.default_rng([seed, index])


def sweeps_text(seed: int = SEED) -> str:
    """Text of ``sweeps.csv``: every grade's points, model values times seeded noise.

    Per grade, in this order from its own generator: the logged temperature noise (if
    any), the storage-modulus noise, the loss-factor noise.
    """
    rows = []
    for index, row in enumerate(CATALOG):
        grade = row[0]
        model = GRADE_MODELS[grade]
        plan = GRIDS[model.grid]
        rng = grade_rng(index, seed)
        if isinstance(plan, TemperatureRamp):
            temperature, text, labels = _ramp_points(plan, rng)
        else:
            temperature, text, labels = _isotherm_points(plan, rng)
        frequency = labels.astype(float)
        modulus = complex_modulus(temperature, frequency, model)
        storage = modulus.real * np.exp(plan.modulus_noise * rng.standard_normal(modulus.size))
        loss = modulus.imag / modulus.real
        loss = loss * np.exp(plan.loss_noise * rng.standard_normal(modulus.size))
        for t, f, e, eta in zip(text, labels, storage, loss, strict=True):
            rows.append((grade, str(t), str(f), _format(e), _format(eta)))
    return _csv_text(SWEEP_COLUMNS, rows)


def write(directory: Path = HERE) -> list[Path]:
    """Write ``catalog.csv`` and ``sweeps.csv`` into ``directory``; return the paths."""
    directory = Path(directory)
    paths = []
    for name, text in ((CATALOG_NAME, catalog_text()), (SWEEPS_NAME, sweeps_text())):
        path = directory / name
        path.write_text(text, encoding="utf-8", newline="")
        paths.append(path)
    return paths


def differing_files(directory: Path = HERE) -> list[str]:
    """Names of the files in ``directory`` that differ from what ``write`` would write."""
    directory = Path(directory)
    stale = []
    for name, text in ((CATALOG_NAME, catalog_text()), (SWEEPS_NAME, sweeps_text())):
        path = directory / name
        if not path.is_file() or path.read_bytes() != text.encode("utf-8"):
            stale.append(name)
    return stale


def main(argv: list[str] | None = None) -> int:
    """Command line: rewrite the files, or with ``--check`` only compare them."""
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument(
        "--check",
        action="store_true",
        help="exit 1 if the committed files differ from what this script writes",
    )
    parser.add_argument(
        "--out", type=Path, default=HERE, help="directory to write or check (default: here)"
    )
    args = parser.parse_args(argv)
    if args.check:
        stale = differing_files(args.out)
        if stale:
            print(f"out of date in {args.out}: {', '.join(stale)}", file=sys.stderr)
            return 1
        print(f"{CATALOG_NAME} and {SWEEPS_NAME} are up to date")
        return 0
    for path in write(args.out):
        print(f"wrote {path}")
    return 0


if __name__ == "__main__":
    sys.exit(main())
