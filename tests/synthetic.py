"""Sweeps generated from a known model, for round-trip checks of the fitting chain.

The model: a generalized Maxwell series whose weights follow a log-normal distribution
of relaxation times, shifted by WLF above Tg and Arrhenius below it. Everything about it
is known exactly, so a fit to its sweeps can be compared with the truth.

Besides the tidy grid of :func:`sweep`, the generators below imitate what instruments
really export: a temperature logged for every point (:func:`logged_sweep`), a ramp at
fixed frequencies (:func:`ramp_sweep`), a short sheet of three frequencies
(:func:`sparse_sheet`), a sweep with a block of temperatures missing
(:func:`gapped_sweep`), a material with a secondary relaxation that is not
thermorheologically simple (:func:`two_process_sweep`) and a family of generated grades
(:func:`family`). Each takes the :class:`Grade` it samples (its truth); calling the grade
at any temperature and frequency gives the exact E' and loss factor there, so a fit can be
checked at conditions that were never measured. Every generator is deterministic given
its seed.

References
----------
Ferry, J. D. (1980). Viscoelastic Properties of Polymers, 3rd ed. Wiley. (Generalized
Maxwell model, ch. 3; WLF and Arrhenius shifts, ch. 11.)
Williams, M. L., Landel, R. F., Ferry, J. D. (1955). J. Am. Chem. Soc. 77, 3701-3707.
McCrum, N. G., Read, B. E., Williams, G. (1967). Anelastic and Dielectric Effects in
Polymeric Solids. Wiley. (Secondary relaxations, broad and Arrhenius-activated.)
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from engine.physics.shift import ShiftLaw, arrhenius_log_shift

TG_C = -20.0
TRUE_LAW = ShiftLaw("WLF+Arrhenius", 0.0, 17.44, 51.6, TG_C, 200e3, TG_C)
TAU = np.logspace(-14, 6, 81)
_W = np.exp(-0.5 * ((np.log10(TAU) + 4.0) / 2.5) ** 2)
WEIGHTS = _W / _W.sum() * 2.0e9  # [Pa]
EQUILIBRIUM = 2.0e6  # [Pa]
FREQUENCIES = np.array([0.1, 0.3, 1.0, 3.0, 10.0, 30.0, 100.0])
TEMPERATURES = np.arange(-60.0, 86.0, 5.0)

# Secondary (beta) process of the two-process grade, at 0 degC: a weak, broad log-normal
# relaxation at short times with its own Arrhenius shift. Strength 5-15 % of the glassy
# modulus and activation energies of 50-100 kJ/mol are typical of secondary relaxations
# in glassy polymers (McCrum, Read & Williams 1967, from memory).
BETA_FRACTION = 0.10  # of the glassy modulus EQUILIBRIUM + sum(WEIGHTS)
BETA_LOG_TAU = -6.0  # centre, log10 [s] at BETA_REFERENCE_C
BETA_WIDTH = 1.5  # standard deviation of log10 tau [decades]
BETA_ACTIVATION = 70e3  # [J/mol]
BETA_REFERENCE_C = 0.0

# Family of generated grades: a lab sheet of 5 frequencies x 12 temperatures per grade.
FAMILY_FREQUENCIES = np.array([0.3, 1.0, 3.0, 10.0, 30.0])
FAMILY_TEMPERATURE_STEP = 10.0  # [K]
FAMILY_TEMPERATURE_COUNT = 12
FAMILY_TAU = np.logspace(-16, 14, 121)


def _maxwell(omega, tau, weights, equilibrium):
    """E' and E'' [Pa] of a generalized Maxwell series at angular frequency ``omega``."""
    x = omega[..., None] * tau
    storage = equilibrium + np.sum(weights * x**2 / (1 + x**2), axis=-1)
    loss = np.sum(weights * x / (1 + x**2), axis=-1)
    return storage, loss


def model(temperature, frequency, law: ShiftLaw = TRUE_LAW):
    """(E' [Pa], loss factor) of the known model at temperature [degC], frequency [Hz]."""
    omega = 2 * np.pi * np.asarray(frequency, float) * 10.0 ** law.log_shift(temperature)
    storage, loss = _maxwell(omega, TAU, WEIGHTS, EQUILIBRIUM)
    return storage, loss / storage


def _add_noise(storage, eta, noise, rng):
    """Log-normal scatter: ``noise`` in E', twice that in the loss factor (drawn in order)."""
    storage = storage * np.exp(rng.normal(0, noise, storage.size))
    eta = eta * np.exp(rng.normal(0, 2 * noise, eta.size))
    return storage, eta


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
        storage, eta = _add_noise(storage, eta, noise, np.random.default_rng(seed))
    return np.column_stack([t, f, storage, eta])


def lognormal_weights(tau, log_tau_centre: float, width: float, total: float) -> np.ndarray:
    """Weights of a log-normal distribution of relaxation times.

    Parameters
    ----------
    tau : array [s]
        Relaxation times of the series.
    log_tau_centre : float [log10 s]
        Centre of the distribution.
    width : float [decades]
        Standard deviation of log10 tau.
    total : float [Pa]
        Sum of the weights (the relaxation strength).

    Returns
    -------
    weights : array [Pa]
        w_i proportional to exp(-((log10 tau_i - centre) / width)^2 / 2), summing to
        ``total``.
    """
    w = np.exp(-0.5 * ((np.log10(tau) - log_tau_centre) / width) ** 2)
    return w / w.sum() * total


@dataclass(frozen=True, eq=False)
class BetaProcess:
    """A secondary relaxation: a Maxwell series with its own Arrhenius shift.

    Attributes
    ----------
    tau : array [s]
        Relaxation times at ``reference_C``.
    weights : array [Pa]
    activation_J_per_mol : float [J/mol]
    reference_C : float [degC]
    """

    tau: np.ndarray
    weights: np.ndarray
    activation_J_per_mol: float
    reference_C: float


@dataclass(frozen=True, eq=False)
class Grade:
    """A material known exactly: the truth a generated sweep is sampled from.

    The alpha process is a generalized Maxwell series (``tau`` at ``law.reference_C``,
    ``weights``, ``equilibrium``) shifted by ``law``; an optional ``beta`` process adds a
    second series shifted by its own Arrhenius law, which makes the material not
    thermorheologically simple. Call the grade for (E' [Pa], loss factor) at any
    temperature [degC] and frequency [Hz] (broadcast).

    Notes
    -----
    E'(w) = E_e + sum w_i (w tau_i)^2 / (1 + (w tau_i)^2),
    E''(w) = sum w_i w tau_i / (1 + (w tau_i)^2), w = 2 pi f aT(T) (Ferry 1980, ch. 3).
    """

    law: ShiftLaw = TRUE_LAW
    tau: np.ndarray = field(default_factory=lambda: TAU)  # [s]
    weights: np.ndarray = field(default_factory=lambda: WEIGHTS)  # [Pa]
    equilibrium: float = EQUILIBRIUM  # [Pa]
    beta: BetaProcess | None = None

    @property
    def glassy(self) -> float:
        """High-frequency limit of E' [Pa]."""
        beta = 0.0 if self.beta is None else float(self.beta.weights.sum())
        return float(self.equilibrium + self.weights.sum() + beta)

    def moduli(self, temperature, frequency):
        """E' and E'' [Pa] at ``temperature`` [degC] and ``frequency`` [Hz] (broadcast)."""
        t, f = np.broadcast_arrays(np.asarray(temperature, float), np.asarray(frequency, float))
        omega = 2 * np.pi * f * 10.0 ** self.law.log_shift(t)
        storage, loss = _maxwell(omega, self.tau, self.weights, self.equilibrium)
        if self.beta is not None:
            b = self.beta
            omega_b = (
                2
                * np.pi
                * f
                * 10.0 ** arrhenius_log_shift(t, b.activation_J_per_mol, b.reference_C)
            )
            s_b, l_b = _maxwell(omega_b, b.tau, b.weights, 0.0)
            storage, loss = storage + s_b, loss + l_b
        return storage, loss

    def __call__(self, temperature, frequency):
        """(E' [Pa], loss factor [-]) at ``temperature`` [degC] and ``frequency`` [Hz]."""
        storage, loss = self.moduli(temperature, frequency)
        return storage, loss / storage


REFERENCE = Grade()  # the known model of :func:`model`, as a grade
TWO_PROCESS = Grade(
    beta=BetaProcess(
        TAU,
        lognormal_weights(TAU, BETA_LOG_TAU, BETA_WIDTH, BETA_FRACTION * REFERENCE.glassy),
        BETA_ACTIVATION,
        BETA_REFERENCE_C,
    )
)


def _sample(grade: Grade, t_logged, f, noise: float, rng) -> np.ndarray:
    storage, eta = grade(t_logged, f)
    if noise:
        storage, eta = _add_noise(storage, eta, noise, rng)
    return np.column_stack([t_logged, f, storage, eta])


def logged_sweep(
    temperatures=TEMPERATURES,
    frequencies=FREQUENCIES,
    jitter_K: float = 0.2,
    noise: float = 0.02,
    seed: int = 11,
    distribution: str = "uniform",
    drift_K: float = 0.0,
    grade: Grade = REFERENCE,
) -> np.ndarray:
    """A stepped sweep whose every point carries its own logged temperature.

    Parameters
    ----------
    temperatures : array [degC]
        Set-points of the isotherms.
    frequencies : array [Hz]
        Frequencies of each isotherm's scan, in scan order.
    jitter_K : float [K]
        Bound of the random deviation of each point from its set-point.
    noise : float [-]
        Log-normal scatter of E' (standard deviation of ln E'); the loss factor gets twice
        that.
    seed : int
    distribution : {"uniform", "normal"}
        Uniform on [-jitter, +jitter], or normal with standard deviation jitter / 2
        truncated to +-jitter.
    drift_K : float [K]
        A slow drift across each frequency scan, linear from -drift/2 at the first
        frequency to +drift/2 at the last, added to the random deviation.
    grade : Grade
        The truth the points are sampled from.

    Returns
    -------
    points : array (n, 4)
        Logged temperature [degC], frequency [Hz], E' [Pa], loss factor [-], in the order
        of :func:`sweep` (isotherm by isotherm, each scan in the order given); the set-point
        of row i is ``np.repeat(temperatures, len(frequencies))[i]``.

    Notes
    -----
    The moduli are those of ``grade`` at the logged (measured) temperature, which is what
    an instrument records; ``|logged - set-point| <= jitter_K + |drift_K| / 2``.
    """
    if distribution not in ("uniform", "normal"):
        raise ValueError(f"distribution must be 'uniform' or 'normal', not {distribution!r}")
    temperatures = np.asarray(temperatures, float)
    frequencies = np.asarray(frequencies, float)
    rng = np.random.default_rng(seed)
    set_point = np.repeat(temperatures, frequencies.size)
    f = np.tile(frequencies, temperatures.size)
    if distribution == "uniform":
        deviation = rng.uniform(-jitter_K, jitter_K, set_point.size)
    else:
        deviation = rng.normal(0, jitter_K / 2, set_point.size)
        outside = np.abs(deviation) > jitter_K
        while outside.any():  # truncated normal: redraw what falls outside the bound
            deviation[outside] = rng.normal(0, jitter_K / 2, outside.sum())
            outside = np.abs(deviation) > jitter_K
    ramp = np.linspace(-0.5, 0.5, frequencies.size) if frequencies.size > 1 else np.zeros(1)
    deviation = deviation + drift_K * np.tile(ramp, temperatures.size)
    return _sample(grade, set_point + deviation, f, noise, rng)


def ramp_sweep(
    t_start: float = -60.0,
    t_end: float = 85.0,
    frequencies=(1.0, 3.0, 10.0, 30.0),
    rate_K_per_min: float = 2.0,
    seconds_per_point: float = 6.0,
    noise: float = 0.01,
    seed: int = 13,
    grade: Grade = REFERENCE,
) -> np.ndarray:
    """A temperature ramp measured at fixed frequencies taken in turn.

    Parameters
    ----------
    t_start, t_end : float [degC]
        Start and end of the ramp (a cooling ramp when ``t_end < t_start``).
    frequencies : sequence [Hz]
        Cycled in order: point k is measured at ``frequencies[k % len(frequencies)]``.
    rate_K_per_min : float [K/min]
        Heating (or cooling) rate, positive.
    seconds_per_point : float [s]
        Time taken by one point.
    noise : float [-]
        Log-normal scatter of E'; the loss factor gets twice that.
    seed : int
    grade : Grade
        The truth the points are sampled from.

    Returns
    -------
    points : array (n, 4)
        Temperature [degC], frequency [Hz], E' [Pa], loss factor [-] in time order. Every
        point has its own temperature (steps of ``rate * seconds_per_point / 60`` K, 0.2 K
        by default); no two points share one.
    """
    if rate_K_per_min <= 0 or seconds_per_point <= 0:
        raise ValueError("rate_K_per_min and seconds_per_point must be positive")
    step = rate_K_per_min * seconds_per_point / 60.0
    n = int(np.floor(abs(t_end - t_start) / step)) + 1
    t = t_start + np.sign(t_end - t_start) * step * np.arange(n)
    freqs = np.asarray(frequencies, float)
    f = freqs[np.arange(n) % freqs.size]
    return _sample(grade, t, f, noise, np.random.default_rng(seed))


def sparse_sheet(
    t_start: float = -50.0,
    t_end: float = 70.0,
    step_K: float = 10.0,
    frequencies=(1.0, 10.0, 100.0),
    noise: float = 0.02,
    jitter_K: float = 0.0,
    seed: int = 17,
    grade: Grade = REFERENCE,
) -> np.ndarray:
    """A short data sheet: three frequencies at 10 K steps, with scatter.

    Parameters
    ----------
    t_start, t_end : float [degC]
        First and last set-points (``t_end`` included when on the step).
    step_K : float [K]
    frequencies : sequence [Hz]
    noise : float [-]
        Log-normal scatter of E'; the loss factor gets twice that.
    jitter_K : float [K]
        Deviation of the logged temperatures, as in :func:`logged_sweep` (none by
        default: sheets usually list set-points).
    seed : int
    grade : Grade

    Returns
    -------
    points : array (n, 4)
        Temperature [degC], frequency [Hz], E' [Pa], loss factor [-].
    """
    temperatures = np.arange(t_start, t_end + step_K / 2, step_K)
    return logged_sweep(temperatures, frequencies, jitter_K, noise, seed, grade=grade)


def gapped_sweep(
    gap_C=(-12.5, 7.5),
    temperatures=TEMPERATURES,
    frequencies=FREQUENCIES,
    noise: float = 0.01,
    seed: int = 19,
    grade: Grade = REFERENCE,
) -> np.ndarray:
    """A stepped sweep with a block of isotherms missing.

    Parameters
    ----------
    gap_C : (float, float) [degC]
        Set-points strictly between these two are left out. The default removes -10 to
        5 degC, just above Tg of :data:`REFERENCE`, where the shift between the isotherms
        either side (about 4.9 decades) exceeds the 3 decades one scan covers, so the
        reduced-frequency coverage has a gap of about 1.9 decades.
    temperatures : array [degC]
    frequencies : array [Hz]
    noise : float [-]
    seed : int
    grade : Grade

    Returns
    -------
    points : array (n, 4)
        Temperature [degC], frequency [Hz], E' [Pa], loss factor [-].
    """
    temperatures = np.asarray(temperatures, float)
    keep = (temperatures <= gap_C[0]) | (temperatures >= gap_C[1])
    return logged_sweep(temperatures[keep], frequencies, 0.0, noise, seed, grade=grade)


def two_process_model(temperature, frequency):
    """(E' [Pa], loss factor) of :data:`TWO_PROCESS` at temperature [degC], frequency [Hz].

    Notes
    -----
    The alpha process is :func:`model` (WLF above Tg, Arrhenius below); the beta process
    is a log-normal series of 10 % of the glassy modulus centred at 1e-6 s at 0 degC,
    1.5 decades wide, shifted by an Arrhenius law of 70 kJ/mol. The two shift differently,
    so no single horizontal shift superposes the isotherms where both are felt (below
    about -30 degC in 0.1-100 Hz, where the pairwise misfit reaches 0.05-0.16 decades).
    """
    return TWO_PROCESS(temperature, frequency)


def two_process_sweep(
    temperatures=TEMPERATURES,
    frequencies=FREQUENCIES,
    noise: float = 0.01,
    jitter_K: float = 0.0,
    seed: int = 23,
) -> np.ndarray:
    """A stepped sweep of :data:`TWO_PROCESS` (see :func:`two_process_model`).

    Parameters
    ----------
    temperatures : array [degC]
    frequencies : array [Hz]
    noise : float [-]
    jitter_K : float [K]
        As in :func:`logged_sweep`.
    seed : int

    Returns
    -------
    points : array (n, 4)
        Temperature [degC], frequency [Hz], E' [Pa], loss factor [-].
    """
    return logged_sweep(temperatures, frequencies, jitter_K, noise, seed, grade=TWO_PROCESS)


def random_grade(rng: np.random.Generator) -> Grade:
    """One generated grade of :func:`family`.

    Parameters
    ----------
    rng : numpy.random.Generator

    Returns
    -------
    grade : Grade
        Tg uniform in -45...5 degC; WLF above Tg (C1 12-20, C2 40-70 K, referred to Tg),
        Arrhenius below (150-300 kJ/mol); glassy modulus 1-3 GPa, equilibrium modulus
        0.1-1 % of it; a narrow log-normal core (centred at 1-100 s at Tg, 1.0-1.6
        decades wide) over a weak constant-loss background: loss factor 1e-5...1e-3 on
        the rubbery side of the core and 0.005-0.03 within 12 decades on its glassy side.
        (Ranges typical of elastomers and damping polymers, from memory.)

    Notes
    -----
    A log-normal spectrum alone makes E'' fall off like a Gaussian away from the
    transition, so the loss factor would drop to 1e-10 and below on the plateaus, far
    under what any instrument resolves; the background sets the plateau levels. A flat
    spectrum H (per unit ln tau) gives E'' = (pi / 2) H (Ferry 1980, ch. 4, from memory),
    so a plateau loss factor eta over a modulus E needs weights
    w = eta E 2 dlog10(tau) ln(10) / pi per mode. The core takes what the background
    leaves of the glassy modulus.
    """
    tg = rng.uniform(-45.0, 5.0)
    c1, c2 = rng.uniform(12.0, 20.0), rng.uniform(40.0, 70.0)
    activation = rng.uniform(150e3, 300e3)
    centre, width = rng.uniform(0.0, 2.0), rng.uniform(1.0, 1.6)
    glassy = 10.0 ** rng.uniform(9.0, np.log10(3e9))
    equilibrium = glassy * 10.0 ** rng.uniform(-3.0, -2.0)
    eta_rubbery, eta_glassy = 10.0 ** rng.uniform(-5.0, -3.0), 10.0 ** rng.uniform(-2.3, -1.5)
    log_tau = np.log10(FAMILY_TAU)
    per_mode = 2.0 * (log_tau[1] - log_tau[0]) * np.log(10.0) / np.pi
    rubbery_side = np.where(log_tau > centre, equilibrium * eta_rubbery, 0.0)
    glassy_side = np.where(
        (log_tau <= centre) & (log_tau > centre - 12.0), glassy * eta_glassy, 0.0
    )
    background = (rubbery_side + glassy_side) * per_mode
    core = lognormal_weights(FAMILY_TAU, centre, width, glassy - equilibrium - background.sum())
    law = ShiftLaw("WLF+Arrhenius", tg, c1, c2, tg, activation, tg)
    return Grade(law, FAMILY_TAU, core + background, equilibrium)


def family_temperatures(grade: Grade) -> np.ndarray:
    """The 12 set-points [degC] of a family grade: 10 K steps from about Tg - 30 K."""
    start = 5.0 * np.round((grade.law.split_C - 30.0) / 5.0)
    return start + FAMILY_TEMPERATURE_STEP * np.arange(FAMILY_TEMPERATURE_COUNT)


def family(n: int = 200, seed: int = 29, noise: float = 0.01) -> list[tuple[np.ndarray, Grade]]:
    """A generated family of grades, each measured on 5 frequencies x 12 temperatures.

    Parameters
    ----------
    n : int
        Number of grades.
    seed : int
    noise : float [-]
        Log-normal scatter of E'; the loss factor gets twice that.

    Returns
    -------
    grades : list of (points, truth)
        ``points`` (60, 4): temperature [degC], frequency [Hz], E' [Pa], loss factor [-]
        on :data:`FAMILY_FREQUENCIES` x :func:`family_temperatures`; ``truth`` the
        :class:`Grade` (callable: (E', loss factor) at (T, f)). See :func:`random_grade`.
    """
    rng = np.random.default_rng(seed)
    out = []
    for _ in range(n):
        grade = random_grade(rng)
        temps = family_temperatures(grade)
        t = np.repeat(temps, FAMILY_FREQUENCIES.size)
        f = np.tile(FAMILY_FREQUENCIES, temps.size)
        out.append((_sample(grade, t, f, noise, rng), grade))
    return out


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
