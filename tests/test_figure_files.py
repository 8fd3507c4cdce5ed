"""``--figures``: every figure as PNG and SVG files in the output folder's ``figures/``.

Outside sources: the PNG signature and IHDR layout (ISO/IEC 15948) and the
standard XML parser (the SVG files are well-formed XML with an ``<svg>`` root,
W3C SVG 1.1); the figures' content is checked in tests/test_maps.py.
"""

from __future__ import annotations

import struct
import xml.etree.ElementTree as ET
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

from specgraph import gallery
from specgraph.cli import main
from specgraph.export import write_figures

SVG = "{http://www.w3.org/2000/svg}svg"


def _network_files(folder: Path) -> tuple[Path, Path]:
    """A 300-node road-like network as edge and node tables (ids invented)."""
    net = gallery.road_like(300, rng=7)
    upper = net.adjacency.tocoo()
    keep = upper.row < upper.col
    edges = pd.DataFrame(
        {"source": net.node_ids[upper.row[keep]], "target": net.node_ids[upper.col[keep]]}
    )
    nodes = pd.DataFrame(
        {"node": net.node_ids, "x": net.coordinates[:, 0], "y": net.coordinates[:, 1]}
    )
    edge_path, node_path = folder / "pipes.csv", folder / "junctions.csv"
    edges.to_csv(edge_path, index=False)
    nodes.to_csv(node_path, index=False)
    return edge_path, node_path


def _check_png(path: Path) -> None:
    data = path.read_bytes()
    assert data[:8] == b"\x89PNG\r\n\x1a\n"  # ISO/IEC 15948 signature
    width, height = struct.unpack(">II", data[16:24])
    assert width > 100
    assert height > 100


def _check_svg(path: Path) -> ET.Element:
    root = ET.parse(path).getroot()
    assert root.tag == SVG
    return root


def test_zones_writes_every_figure_and_a_later_run_without_drops_them(tmp_path: Path) -> None:
    edges, nodes = _network_files(tmp_path)
    out = tmp_path / "out"
    run = ["zones", str(edges), "--nodes", str(nodes), "--node-col", "node", "--x-col", "x"]
    run += ["--y-col", "y", "--zones", "12", "--out", str(out), "--quiet"]
    assert main([*run, "--figures"]) == 0
    folder = out / "figures"
    names = sorted(p.name for p in folder.iterdir())
    assert names == sorted(
        f"{stem}.{ext}" for stem in ("spectrum", "zone_bars", "zone_map") for ext in ("png", "svg")
    )
    for stem in ("spectrum", "zone_bars", "zone_map"):
        _check_png(folder / f"{stem}.png")
        _check_svg(folder / f"{stem}.svg")
    zones = pd.read_csv(out / "zones.csv")
    svg = (folder / "zone_map.svg").read_text("utf-8")
    for zone in np.unique(zones["zone"]):
        assert f'id="zone-label-{zone}"' in svg
    assert not list(folder.glob(".*partial"))
    # Without --figures the stale figures go, in a commit of their own, and the rest stays.
    assert main(run) == 0
    assert list(folder.iterdir()) == []
    assert (out / "zones.csv").exists()


def test_stability_and_demo_take_figures(tmp_path: Path) -> None:
    edges, nodes = _network_files(tmp_path)
    out = tmp_path / "stable"
    run = ["stability", str(edges), "--nodes", str(nodes), "--node-col", "node"]
    run += ["--x-col", "x", "--y-col", "y", "--zones", "6", "--repeats", "1"]
    assert main([*run, "--out", str(out), "--quiet", "--figures"]) == 0
    assert (out / "figures" / "stability.png").exists()
    root = _check_svg(out / "figures" / "stability.svg")
    assert any(e.get("id") == "low-confidence" for e in root.iter())
    demo = tmp_path / "demo"
    assert main(["demo", "--out", str(demo), "--quiet", "--figures"]) == 0
    assert (demo / "figures" / "zone_map.svg").exists()


def test_write_figures_leaves_a_missing_folder_missing(tmp_path: Path) -> None:
    assert write_figures(tmp_path / "nowhere", {}) == []
    assert not (tmp_path / "nowhere").exists()
    written = write_figures(tmp_path, {"zone_map.png": b"\x89PNG", "stability.svg": b"<svg/>"})
    assert sorted(p.name for p in written) == ["stability.svg", "zone_map.png"]
    assert write_figures(tmp_path, {"zone_map.png": b"\x89PNG"})[0].name == "zone_map.png"
    assert not (tmp_path / "figures" / "stability.svg").exists()


def test_figure_files_refuses_an_unknown_format() -> None:
    from specgraph import find_zones
    from specgraph.exceptions import ParameterError
    from specgraph.report import figure_files, zone_bars_figure

    bars = zone_bars_figure(find_zones(gallery.barbell(4), 2, rng=0))
    with pytest.raises(ParameterError, match="formats"):
        figure_files({"zone_bars": bars}, formats=("jpeg",))  # type: ignore[arg-type]
