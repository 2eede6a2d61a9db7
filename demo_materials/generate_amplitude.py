"""Write the invented strain-amplitude sweeps of the demo data set: ``amplitude.csv``.

Every number here is invented. Four of the filled demo grades (Shore A 50 and harder)
have a strain-amplitude sweep at one temperature and frequency: storage modulus and loss
factor at 14 dynamic strain amplitudes, log-spaced from 1e-4 to 0.3, computed from the
Kraus (1984) model with the parameters of ``KRAUS_MODELS`` and multiplied by seeded
log-normal measurement noise of 2 %. They belong to no real material and must not be
used for design.

Run ``python demo_materials/generate_amplitude.py`` to rewrite the file next to this
script, or ``python demo_materials/generate_amplitude.py --check`` to exit with status 1
when the committed file differs from what the script would write.

The script uses numpy only and does not import the quietgrade engine, so the data stay
independent of the fitting code that is tested against them.

Model (Kraus 1984), in the grade's own mode (E for tensile grades, G for shear)::

    E'(g)  = E'inf + (E'0 - E'inf) / (1 + (g/gc)^(2m))
    E''(g) = E''inf + 2 (E''max - E''inf) (g/gc)^m / (1 + (g/gc)^(2m))
    eta(g) = E''(g) / E'(g)

Noise: E' and eta are each multiplied by exp(0.02 N(0, 1)), from the generator
``numpy.random.default_rng([SEED, k])`` with k the grade's place in ``KRAUS_MODELS``
(the modulus noise first, then the loss-factor noise). Values are written with 5
significant digits.

References
----------
Kraus, G. (1984). Mechanical losses in carbon-black-filled rubbers. J. Appl. Polym.
Sci.: Appl. Polym. Symp. 39, 75-92.
"""

from __future__ import annotations

import argparse
import csv
import io
import sys
from pathlib import Path
from typing import NamedTuple

import numpy as np

HERE = Path(__file__).resolve().parent
AMPLITUDE_NAME = "amplitude.csv"
SEED = 19_840_075
NOISE = 0.02  # sigma of the log-normal noise on E' and on eta
STRAINS = np.logspace(-4.0, np.log10(0.3), 14)  # dynamic strain amplitudes [-]
SIGNIFICANT_DIGITS = 5
COLUMNS = (
    "material",
    "temperature [degC]",
    "frequency [Hz]",
    "strain_amplitude [-]",
    "storage_modulus [MPa]",
    "loss_factor",
)


class KrausModel(NamedTuple):
    """Invented Kraus parameters of one grade; moduli [MPa] in the grade's mode."""

    temperature: float  # [degC]
    frequency: float  # [Hz]
    e0: float  # small-strain storage modulus E'0 [MPa]
    e_inf: float  # large-strain storage modulus E'inf [MPa]
    loss_inf: float  # loss modulus away from the peak E''inf [MPa]
    loss_max: float  # peak loss modulus E''max [MPa]
    strain_c: float  # characteristic strain amplitude gc [-]
    m: float  # exponent [-]


# Small-strain values chosen near each grade's E' (G' for the shear grade FP-IIR50) and
# loss factor in sweeps.csv at the same temperature and frequency; softening and peak
# chosen as a filled compound of that hardness might show them (invented).
KRAUS_MODELS = {
    "LAB-NR55": KrausModel(23.0, 10.0, 5.2, 2.3, 0.30, 0.55, 0.012, 0.55),
    "FP-IIR50": KrausModel(23.0, 1.0, 1.3, 0.75, 0.22, 0.36, 0.030, 0.60),
    "BW-NBR65": KrausModel(23.0, 10.0, 8.6, 3.1, 0.70, 1.30, 0.008, 0.50),
    "QC-EPDM60": KrausModel(23.0, 10.0, 6.6, 3.0, 0.38, 0.80, 0.020, 0.60),
}


def kraus(strain: np.ndarray, model: KrausModel) -> tuple[np.ndarray, np.ndarray]:
    """Storage and loss modulus [MPa] of the Kraus model at ``strain``."""
    x = (strain / model.strain_c) ** model.m
    storage = model.e_inf + (model.e0 - model.e_inf) / (1.0 + x**2)
    loss = model.loss_inf + 2.0 * (model.loss_max - model.loss_inf) * x / (1.0 + x**2)
    return storage, loss


def _format(value: float) -> str:
    return f"{value:.{SIGNIFICANT_DIGITS}g}"


def amplitude_text(seed: int = SEED) -> str:
    """Text of ``amplitude.csv``: every grade's sweep, model values times seeded noise."""
    buffer = io.StringIO()
    writer = csv.writer(buffer, lineterminator="\n")
    writer.writerow(COLUMNS)
    for index, (grade, model) in enumerate(KRAUS_MODELS.items()):
        rng = np.random.default_rng([seed, index])
        storage, loss = kraus(STRAINS, model)
        eta = loss / storage
        storage = storage * np.exp(NOISE * rng.standard_normal(STRAINS.size))
        eta = eta * np.exp(NOISE * rng.standard_normal(STRAINS.size))
        for g, e, l in zip(STRAINS, storage, eta, strict=True):
            writer.writerow(
                (grade, f"{model.temperature:g}", f"{model.frequency:g}")
                + (_format(g), _format(e), _format(l))
            )
    return buffer.getvalue()


def main(argv: list[str] | None = None) -> int:
    """Command line: rewrite the file, or with ``--check`` only compare it."""
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument(
        "--check",
        action="store_true",
        help="exit 1 if the committed file differs from what this script writes",
    )
    parser.add_argument(
        "--out", type=Path, default=HERE, help="directory to write or check (default: here)"
    )
    args = parser.parse_args(argv)
    path = args.out / AMPLITUDE_NAME
    text = amplitude_text()
    if args.check:
        if not path.is_file() or path.read_bytes() != text.encode("utf-8"):
            print(f"out of date in {args.out}: {AMPLITUDE_NAME}", file=sys.stderr)
            return 1
        print(f"{AMPLITUDE_NAME} is up to date")
        return 0
    path.write_text(text, encoding="utf-8", newline="")
    print(f"wrote {path}")
    return 0


if __name__ == "__main__":
    sys.exit(main())
