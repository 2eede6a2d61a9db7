"""A new command-line process imports only what its command needs (issue: cold starts)."""

from __future__ import annotations

import subprocess
import sys

import numpy as np
from scipy.special import expit

from engine.physics.jointfit import _expit

HEAVY = ("scipy.signal", "scipy.stats", "scipy.special", "scipy.optimize", "plotly", "pandas")


def _imported_after(code: str) -> set[str]:
    probe = f"import sys\n{code}\nprint('\\n'.join(sorted(sys.modules)))"
    out = subprocess.run([sys.executable, "-c", probe], capture_output=True, text=True, check=True)
    return set(out.stdout.split())


def test_reading_a_fitted_curve_needs_no_heavy_scipy_module():
    # props, fit (cached), list and rank read stored curves: the fitting and
    # peak-finding modules of scipy (about 1.5 s to import on two cores) stay unloaded.
    loaded = _imported_after(
        "import engine.cli, engine.curves.mastercurve, engine.curves.bank, engine.library.fits, "
        "engine.selection.ranking, engine.selection.spread"
    )
    assert not {m for m in loaded if m.startswith(HEAVY)}, sorted(
        m for m in loaded if m.startswith(HEAVY)
    )[:5]


def test_the_logistic_function_equals_scipys():
    # scipy.special.expit is the reference (a general-purpose library), overflow-free
    # over +-800.
    x = np.linspace(-800.0, 800.0, 20001)
    np.testing.assert_allclose(_expit(x), expit(x), rtol=1e-15, atol=1e-300)
