"""The scripting API: ``import engine`` gives the names DEVELOPERS.md lists, each with a
numpydoc docstring whose examples run here as doctests."""

from __future__ import annotations

import doctest
import importlib
import inspect
import subprocess
import sys

import pytest

import engine

API = (
    "Library",
    "Criteria",
    "OperatingWindow",
    "MountDesign",
    "fit_library",
    "rank_library",
    "write_shortlist",
)
# Modules whose docstrings carry examples: the API's own and the tables it rests on.
DOCTESTED = (
    "engine.api",
    "engine.base.fields",
    "engine.selection.criteria",
    "engine.library.store",
    "engine.library.fits",
    "engine.output.export",
    "engine.curves.window",
    "engine.curves.mountcheck",
)


@pytest.mark.parametrize("module", DOCTESTED)
def test_docstring_examples_run(module):
    found = doctest.testmod(
        importlib.import_module(module),
        optionflags=doctest.ELLIPSIS | doctest.NORMALIZE_WHITESPACE,
        raise_on_error=False,
        report=True,
    )
    assert found.failed == 0, f"{found.failed} failing example(s) in {module}"


@pytest.mark.parametrize("name", API)
def test_each_api_name_is_documented_with_an_example(name):
    obj = getattr(engine, name)
    doc = inspect.getdoc(obj) or ""
    assert "Examples\n--------" in doc, f"{name} has no Examples section"
    if inspect.isfunction(obj):
        assert "Parameters\n----------" in doc and "Returns\n-------" in doc
    parsed = doctest.DocTestParser().get_examples(doc)
    assert parsed, f"{name}'s Examples hold no runnable example"


def test_the_api_is_in_all_and_import_engine_stays_light():
    assert set(API) <= set(engine.__all__)
    # The names load on first use: a bare import pulls in neither SciPy nor SQLAlchemy.
    code = "import sys, engine; print(sorted({'scipy', 'sqlalchemy'} & set(sys.modules)))"
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True)
    assert out.stdout.strip() == "[]"


def test_an_unknown_name_is_an_attribute_error():
    with pytest.raises(AttributeError, match="has no attribute 'Librar'"):
        engine.Librar  # noqa: B018
