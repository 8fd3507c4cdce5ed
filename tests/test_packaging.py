"""The oldest-versions CI environment pins exactly the lower bounds of pyproject.toml.

``.ci/oldest`` installs the package with ``-c .ci/oldest-constraints.txt``, one
``name==version`` line per dependency of ``[project] dependencies`` and of the ``test``
extra, so that the suite also runs at the oldest versions the package claims to support
(common practice for libraries; uv's ``--resolution lowest-direct`` resolves the same
versions, from memory). These checks keep the two files from drifting apart: every such
dependency has a ``>=`` lower bound, a pin, and the pin equals the bound.

Sources: PEP 508 (dependency specifiers, parsed with ``packaging.requirements``), PEP 440
(version specifiers; under its version matching ``1.25 == 1.25.0``, zero padding) and
PEP 503 (name normalization: ``Scikit_Learn`` and ``scikit-learn`` are one project).
"""

from __future__ import annotations

import re
import tomllib
from pathlib import Path

import pytest
from packaging.requirements import Requirement
from packaging.utils import canonicalize_name
from packaging.version import Version

ROOT = Path(__file__).resolve().parents[1]
CONSTRAINTS = ROOT / ".ci" / "oldest-constraints.txt"
PIN = re.compile(r"^(?P<name>[A-Za-z0-9][A-Za-z0-9._-]*)==(?P<version>[^\s#;]+)$")

pytestmark = pytest.mark.skipif(
    not CONSTRAINTS.exists(), reason="no .ci/ here (an unpacked sdist holds only the package)"
)


def requirements() -> list[Requirement]:
    project = tomllib.loads((ROOT / "pyproject.toml").read_text(encoding="utf-8"))["project"]
    texts = project["dependencies"] + project["optional-dependencies"]["test"]
    return [Requirement(text) for text in texts]


def lower_bound(requirement: Requirement) -> Version | None:
    bounds = [Version(s.version) for s in requirement.specifier if s.operator == ">="]
    return max(bounds) if bounds else None


def pins() -> dict[str, tuple[Version, bool]]:
    """Pinned version of each project and whether a comment line stands right above it."""
    found: dict[str, tuple[Version, bool]] = {}
    commented = False
    for number, line in enumerate(CONSTRAINTS.read_text(encoding="utf-8").splitlines(), 1):
        text = line.strip()
        if not text or text.startswith("#"):
            commented = text.startswith("#")
            continue
        match = PIN.match(text)
        assert match, f"{CONSTRAINTS.name}, line {number}: not a 'name==version' pin: {line!r}"
        name = canonicalize_name(match["name"])
        assert name not in found, f"{CONSTRAINTS.name}, line {number}: {name} pinned twice"
        found[name] = (Version(match["version"]), commented)
        commented = False
    return found


def test_every_dependency_has_a_lower_bound() -> None:
    missing = [str(r) for r in requirements() if lower_bound(r) is None]
    assert not missing, f"no '>=' lower bound, so no oldest version to test: {missing}"


def test_every_dependency_is_pinned_at_its_lower_bound() -> None:
    pinned = pins()
    wrong = []
    for requirement in requirements():
        name = canonicalize_name(requirement.name)
        bound = lower_bound(requirement)
        if name not in pinned:
            wrong.append(f"{name}: not pinned (want {name}=={bound})")
        elif pinned[name][0] != bound:
            wrong.append(f"{name}: pinned {pinned[name][0]}, lower bound {bound}")
        elif not requirement.specifier.contains(pinned[name][0], prereleases=True):
            wrong.append(f"{name}: pin {pinned[name][0]} outside {requirement.specifier}")
    assert not wrong, "\n".join(wrong)


def test_other_pins_say_why() -> None:
    # A transitive dependency is pinned only where its newest release breaks an old
    # direct dependency; the comment line above the pin says which and why.
    direct = {canonicalize_name(r.name) for r in requirements()}
    silent = [name for name, (_, why) in pins().items() if name not in direct and not why]
    assert not silent, f"pins of packages that are not direct dependencies, unexplained: {silent}"


def test_pins_follow_pep_440_equality() -> None:
    # PEP 440 version matching pads with zeros: the pin 1.25.0 equals the bound 1.25;
    # checked on made-up versions so the comparison above cannot pass vacuously.
    assert Version("1.25") == Version("1.25.0")
    assert Version("1.25.1") != Version("1.25")
    assert lower_bound(Requirement("example>=1.2,<3,>=1.4")) == Version("1.4")
    assert lower_bound(Requirement("example<3")) is None
