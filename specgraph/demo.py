"""The bundled demo network: the invented town of Quillmere.

A generated water distribution network of about 3,000 junctions (see
``datasets/README.md`` in the source tree for how it was made). It is demo
data, not a hydraulic model of any real place.
"""

from __future__ import annotations

from dataclasses import dataclass
from importlib import resources
from pathlib import Path

from .exceptions import SpecgraphError
from .io import read_edges
from .network import Network

__all__ = ["DEMO_ZONES", "DemoFiles", "demo_files", "load_demo"]

#: Districts the demo's generator draws. ``specgraph demo`` finds this count
#: itself (``--zones auto``): the Quillmere spectrum, with its dangling
#: branches attached, has its largest relative eigengap after the 8th eigenvalue.
DEMO_ZONES = 8

_NAME = "quillmere"


@dataclass(frozen=True)
class DemoFiles:
    """Paths of the demo tables."""

    pipes: Path
    junctions: Path
    sources: Path


def _data_folder() -> Path:
    # An installed wheel carries the tables inside the package (_data/); a
    # source checkout (also an editable install) keeps them in datasets/.
    packaged = resources.files("specgraph") / "_data" / _NAME
    if packaged.is_dir():
        return Path(str(packaged))
    checkout = Path(__file__).resolve().parent.parent / "datasets" / _NAME
    if checkout.is_dir():
        return checkout
    raise SpecgraphError("the demo tables are missing from this installation; reinstall specgraph")


def demo_files() -> DemoFiles:
    """Locate the demo tables (``pipes.csv``, ``junctions.csv``, ``sources.csv``)."""
    folder = _data_folder()
    return DemoFiles(
        pipes=folder / "pipes.csv",
        junctions=folder / "junctions.csv",
        sources=folder / "sources.csv",
    )


def load_demo() -> Network:
    """The Quillmere network: pipe lengths as distances, connections served as sizes.

    Examples
    --------
    >>> net = load_demo()
    >>> net.n_components, net.coordinates is not None, net.sizes is not None
    (1, True, True)
    """
    files = demo_files()
    return read_edges(
        files.pipes,
        weight="length_m",
        distance=True,
        nodes=files.junctions,
        x="x",
        y="y",
        size="connections",
    )
