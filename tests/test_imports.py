"""Importing the package stays cheap: heavy libraries load on first use.

The package and :mod:`specgraph.diagnostics` resolve their public names on
first access through a module-level ``__getattr__`` (PEP 562, "Module
__getattr__ and __dir__", https://peps.python.org/pep-0562/). Each check runs
in a fresh interpreter, since this test process has long imported everything.
"""

from __future__ import annotations

import json
import subprocess
import sys

import pytest

import specgraph

#: Libraries that ``import specgraph`` must not load: each costs from a few
#: tenths of a second to a second at start-up.
HEAVY = ("sklearn", "matplotlib", "scipy.stats")


def _loaded_after(code: str) -> dict[str, bool]:
    """Which of :data:`HEAVY` a fresh interpreter holds in ``sys.modules`` after ``code``."""
    report = f"print(json.dumps({{m: m in sys.modules for m in {HEAVY!r}}}))"
    probe = f"{code}\nimport json, sys\n{report}"
    done = subprocess.run(
        [sys.executable, "-c", probe], capture_output=True, text=True, check=True, timeout=300
    )
    return json.loads(done.stdout.strip().splitlines()[-1])


def test_import_specgraph_loads_no_heavy_library() -> None:
    assert _loaded_after("import specgraph") == dict.fromkeys(HEAVY, False)


def test_the_probe_sees_a_heavy_import() -> None:
    # The same probe reports scikit-learn once a name that needs it is touched,
    # so the check above can fail.
    loaded = _loaded_after("import specgraph\nspecgraph.ZoneSplitter")
    assert loaded["sklearn"]


def test_public_names_resolve_to_their_modules() -> None:
    from specgraph import diagnostics, zones

    assert specgraph.find_zones is zones.find_zones
    assert specgraph.compare is diagnostics._compare.compare
    assert set(specgraph.__all__) <= set(dir(specgraph))
    assert set(diagnostics.__all__) <= set(dir(diagnostics))
    for name in specgraph.__all__:
        assert getattr(specgraph, name) is not None
    for name in diagnostics.__all__:
        assert getattr(diagnostics, name) is not None


@pytest.mark.parametrize("module", [specgraph, specgraph.diagnostics])
def test_unknown_name_is_an_attribute_error(module: object) -> None:
    name = "no_such_name"
    with pytest.raises(AttributeError, match=name):
        getattr(module, name)
