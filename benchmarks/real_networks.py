"""Open infrastructure networks for the benchmarks, read from registry packages' wheels.

Three registry packages ship real (or realistic, published) network files inside
their wheels. This module downloads a pinned wheel with ``pip download`` (no
install, no code of the package run), takes one file out of it and converts it
with its own code into specgraph's edge and node tables (CSV):

* water distribution networks (EPANET ``.inp`` text files) from ``wntr``:
  junctions, reservoirs and tanks are nodes; pipes, pumps and valves are links.
  The affinity of a pipe or valve is its diameter (a wider pipe ties its ends
  more strongly: common practice in district-metering studies); a pump, which
  has no diameter, takes the widest diameter of the pipes at its ends. Pipes
  whose initial status is ``Closed`` are left out (they do not connect in
  operation) and counted. Reservoirs and tanks are the supply points.
* transmission grids (pandapower's JSON files of published test cases) from
  ``pandapower``: buses are nodes; in-service lines, two-winding transformers,
  three-winding transformers (as the triangle of its three short-circuit
  impedances), impedances and closed bus-bus switches are links. The affinity is the
  branch admittance magnitude ``1 / |z|`` in per unit of the network's own
  base power: a line's ``z = (r + jx) length / parallel / (vn_kv^2 / sn_mva)``,
  a transformer's ``|z| = vk_percent / 100 * sn_mva / sn_trafo / parallel``
  (the per-unit formulas of any power-systems text, e.g. Grainger and
  Stevenson, *Power System Analysis*, 1994, ch. 2 (from memory)). A branch of
  zero impedance (a coupler) takes ``ZERO_IMPEDANCE_PU`` in place of 0.
  Buses with a generator or an external grid are the supply points.
* telecom backbones (networkx node-link JSON) from ``topohub``: sites are
  nodes, links carry their length in kilometres (``dist``), read with
  ``--distance``.

Every converted network records its package, version, file path inside the
wheel and licence (from the wheel's ``METADATA``) in a ``source.json`` beside
its tables.

Usage::

    python benchmarks/real_networks.py            # fetch and convert every network
    python benchmarks/real_networks.py --list     # what is there, with sources
"""

from __future__ import annotations

import argparse
import csv
import io
import json
import math
import subprocess
import sys
import zipfile
from collections.abc import Callable, Iterator
from dataclasses import asdict, dataclass
from pathlib import Path
from typing import Any

#: Per-unit impedance given to a branch whose impedance is written as 0 (a
#: bus coupler): 1e-6 p.u., far below any line's (about 1e-4 to 1e-1 p.u. on a
#: 100 MVA base), so the coupler stays the strongest tie without an infinity.
ZERO_IMPEDANCE_PU = 1e-6

DEFAULT_CACHE = Path(__file__).resolve().parent / ".cache" / "real"


@dataclass(frozen=True)
class Source:
    """One network file inside a pinned wheel."""

    name: str
    kind: str  # water | grid | backbone
    package: str
    version: str
    member: str

    @property
    def requirement(self) -> str:
        return f"{self.package}=={self.version}"


_WNTR = ("wntr", "1.5.0")
_PANDAPOWER = ("pandapower", "3.5.6")
_TOPOHUB = ("topohub", "1.5.1")

SOURCES: tuple[Source, ...] = (
    Source("Net3", "water", *_WNTR, "wntr/library/networks/Net3.inp"),
    Source("ky4", "water", *_WNTR, "wntr/library/networks/ky4.inp"),
    Source("ky10", "water", *_WNTR, "wntr/library/networks/ky10.inp"),
    Source("Net6", "water", *_WNTR, "wntr/library/networks/Net6.inp"),
    *(
        Source(
            case,
            "grid",
            *_PANDAPOWER,
            f"pandapower/networks/power_system_test_case_jsons/{case}.json",
        )
        for case in (
            "case1888rte",
            "case2848rte",
            "case2869pegase",
            "case3120sp",
            "case6470rte",
            "case9241pegase",
            "GBnetwork",
        )
    ),
    *(
        Source(f"backbone-{name}", "backbone", *_TOPOHUB, f"topohub/data/backbone/{name}.json")
        for name in ("europe", "eastern", "world")
    ),
)

EDGE_COLUMNS = ("source", "target", "weight", "link_id", "link_kind")
NODE_COLUMNS = ("node", "x", "y", "supply")


@dataclass(frozen=True)
class Converted:
    """Tables of one network, as lists of rows, and what the conversion left out."""

    edges: list[tuple[Any, ...]]
    nodes: list[tuple[Any, ...]]
    weight_is_distance: bool
    left_out: dict[str, int]


# --------------------------------------------------------------------------- wheels


def wheel_path(source: Source, cache: Path) -> Path:
    """The wheel of ``source``, downloaded into ``cache/wheels`` on first use."""
    folder = cache / "wheels"
    found = sorted(folder.glob(f"{source.package}-{source.version}-*.whl"))
    if found:
        return found[0]
    folder.mkdir(parents=True, exist_ok=True)
    subprocess.run(
        [
            sys.executable,
            "-m",
            "pip",
            "download",
            "--no-deps",
            "--only-binary",
            ":all:",
            "--quiet",
            "--dest",
            str(folder),
            source.requirement,
        ],
        check=True,
    )
    found = sorted(folder.glob(f"{source.package}-{source.version}-*.whl"))
    if not found:
        raise FileNotFoundError(f"pip download gave no wheel for {source.requirement}")
    return found[0]


def wheel_licence(wheel: zipfile.ZipFile) -> str:
    """The licence named in the wheel's METADATA (``License`` or its classifiers)."""
    meta = next(n for n in wheel.namelist() if n.endswith(".dist-info/METADATA"))
    text = wheel.read(meta).decode("utf-8", "replace")
    named, classified = None, []
    for line in text.splitlines():
        if not line.strip():
            break  # the headers end at the first blank line
        if line.startswith("License:") and named is None:
            named = line.split(":", 1)[1].strip()
        if line.startswith("Classifier: License ::"):
            classified.append(line.rsplit("::", 1)[1].strip())
    return named or ", ".join(classified) or "not stated"


# --------------------------------------------------------------------------- EPANET


def _inp_sections(text: str) -> dict[str, list[list[str]]]:
    """Sections of an EPANET input file: upper-case name -> rows of fields."""
    sections: dict[str, list[list[str]]] = {}
    current: list[list[str]] | None = None
    for raw in text.splitlines():
        line = raw.split(";", 1)[0].strip()
        if not line:
            continue
        if line.startswith("[") and line.endswith("]"):
            current = sections.setdefault(line[1:-1].strip().upper(), [])
        elif current is not None:
            current.append(line.split())
    return sections


def convert_epanet(text: str) -> Converted:
    """Water network: diameters as affinities, reservoirs and tanks as supply points."""
    sec = _inp_sections(text)
    xy = {row[0]: (row[1], row[2]) for row in sec.get("COORDINATES", []) if len(row) >= 3}
    supply = {row[0] for name in ("RESERVOIRS", "TANKS") for row in sec.get(name, [])}
    node_ids = [
        row[0] for name in ("JUNCTIONS", "RESERVOIRS", "TANKS") for row in sec.get(name, [])
    ]
    edges: list[tuple[Any, ...]] = []
    widest: dict[str, float] = {}
    closed = 0
    for row in sec.get("PIPES", []):
        link, a, b, diameter = row[0], row[1], row[2], float(row[4])
        if len(row) > 7 and row[7].upper() == "CLOSED":
            closed += 1
            continue
        edges.append((a, b, diameter, link, "pipe"))
        for end in (a, b):
            widest[end] = max(widest.get(end, 0.0), diameter)
    for row in sec.get("VALVES", []):
        edges.append((row[1], row[2], float(row[3]), row[0], f"valve-{row[4].lower()}"))
    for row in sec.get("PUMPS", []):
        a, b = row[1], row[2]
        width = max(widest.get(a, 0.0), widest.get(b, 0.0)) or 1.0
        edges.append((a, b, width, row[0], "pump"))
    nodes = [(v, *xy.get(v, ("", "")), int(v in supply)) for v in node_ids]
    return Converted(edges, nodes, False, {"closed pipes": closed})


# --------------------------------------------------------------------------- pandapower


def _frame(net: dict[str, Any], table: str) -> list[dict[str, Any]]:
    """Rows of one table of a pandapower JSON file (a pandas frame in 'split' form)."""
    entry = net.get(table)
    if not entry:
        return []
    payload = entry["_object"]
    split = json.loads(payload) if isinstance(payload, str) else payload
    columns = split["columns"]
    return [dict(zip(columns, values, strict=True)) for values in split["data"]]


def _admittance(z_pu: float) -> float:
    return 1.0 / max(abs(z_pu), ZERO_IMPEDANCE_PU)


def _in_service(row: dict[str, Any]) -> bool:
    return bool(row.get("in_service", True))


def _grid_lines(
    net: dict[str, Any], vn: dict[int, float], base: float
) -> Iterator[tuple[Any, ...]]:
    for i, row in enumerate(_frame(net, "line")):
        if not _in_service(row):
            continue
        a, b = int(row["from_bus"]), int(row["to_bus"])
        z_base = vn[a] ** 2 / base
        ohm = math.hypot(row["r_ohm_per_km"], row["x_ohm_per_km"]) * row["length_km"]
        parallel = row.get("parallel") or 1
        yield (a, b, _admittance(ohm / parallel / z_base), f"line-{i}", "line")


def _grid_trafos(net: dict[str, Any], base: float) -> Iterator[tuple[Any, ...]]:
    for i, row in enumerate(_frame(net, "trafo")):
        if not _in_service(row):
            continue
        parallel = row.get("parallel") or 1
        z = row["vk_percent"] / 100.0 * base / row["sn_mva"] / parallel
        yield (int(row["hv_bus"]), int(row["lv_bus"]), _admittance(z), f"trafo-{i}", "trafo")
    # A three-winding transformer as the triangle of its three short-circuit
    # impedances, each on the smaller rating of its two windings (from memory).
    pairs = (
        ("hv", "mv", "vk_hv_percent"),
        ("mv", "lv", "vk_mv_percent"),
        ("hv", "lv", "vk_lv_percent"),
    )
    for i, row in enumerate(_frame(net, "trafo3w")):
        if not _in_service(row):
            continue
        for a, b, vk in pairs:
            rating = min(row[f"sn_{a}_mva"], row[f"sn_{b}_mva"])
            z = row[vk] / 100.0 * base / rating
            yield (
                int(row[f"{a}_bus"]),
                int(row[f"{b}_bus"]),
                _admittance(z),
                f"trafo3w-{i}-{a}{b}",
                "trafo3w",
            )


def _grid_ties(net: dict[str, Any], base: float) -> Iterator[tuple[Any, ...]]:
    for i, row in enumerate(_frame(net, "impedance")):
        if not _in_service(row):
            continue
        z = math.hypot(row["rft_pu"], row["xft_pu"]) * base / row["sn_mva"]
        yield (
            int(row["from_bus"]),
            int(row["to_bus"]),
            _admittance(z),
            f"impedance-{i}",
            "impedance",
        )
    for i, row in enumerate(_frame(net, "switch")):
        if row.get("et") == "b" and row.get("closed", True):
            yield (int(row["bus"]), int(row["element"]), _admittance(0.0), f"switch-{i}", "coupler")


def convert_grid(text: str) -> Converted:
    """Transmission grid: per-unit admittances as affinities, generator buses as supply."""
    net = json.loads(text)["_object"]
    base = float(net.get("sn_mva") or 1.0)
    buses = _frame(net, "bus")
    index = json.loads(net["bus"]["_object"])["index"]
    vn = {int(i): float(row["vn_kv"]) for i, row in zip(index, buses, strict=True)}
    live = {int(i) for i, row in zip(index, buses, strict=True) if _in_service(row)}
    supply = {int(r["bus"]) for t in ("gen", "ext_grid") for r in _frame(net, t) if _in_service(r)}
    edges = [
        e
        for part in (_grid_lines(net, vn, base), _grid_trafos(net, base), _grid_ties(net, base))
        for e in part
        if e[0] in live and e[1] in live
    ]
    nodes = [(bus, "", "", int(bus in supply)) for bus in sorted(live)]
    left_out = {"buses out of service": len(vn) - len(live)}
    return Converted(edges, nodes, False, left_out)


# --------------------------------------------------------------------------- topohub


def convert_backbone(text: str) -> Converted:
    """Telecom backbone: link lengths in km (read with --distance), site positions."""
    data = json.loads(text)
    nodes = [(v["id"], *(v.get("pos") or ("", "")), 0) for v in data["nodes"]]
    edges = [
        (e["source"], e["target"], float(e["dist"]), f"link-{i}", e.get("type", ""))
        for i, e in enumerate(data["edges"])
    ]
    zero = sum(1 for e in edges if e[2] <= 0)
    edges = [e for e in edges if e[2] > 0]
    return Converted(edges, nodes, True, {"links of length 0": zero})


CONVERTERS: dict[str, Callable[[str], Converted]] = {
    "water": convert_epanet,
    "grid": convert_grid,
    "backbone": convert_backbone,
}


# --------------------------------------------------------------------------- tables


@dataclass(frozen=True)
class RealNetwork:
    """A converted network on disk."""

    name: str
    kind: str
    edges: Path
    nodes: Path
    weight_is_distance: bool
    record: dict[str, Any]


def _write_csv(path: Path, header: tuple[str, ...], rows: list[tuple[Any, ...]]) -> None:
    buffer = io.StringIO()
    writer = csv.writer(buffer, lineterminator="\n")
    writer.writerow(header)
    writer.writerows(rows)
    tmp = path.with_suffix(".tmp")
    tmp.write_text(buffer.getvalue(), encoding="utf-8")
    tmp.replace(path)


def load(source: Source, cache: Path = DEFAULT_CACHE) -> RealNetwork:
    """Fetch (once) and convert (once) one network; return its tables' paths."""
    folder = cache / source.name
    record_path = folder / "source.json"
    if not record_path.exists():
        wheel = wheel_path(source, cache)
        with zipfile.ZipFile(wheel) as archive:
            text = archive.read(source.member).decode("utf-8", "replace")
            licence = wheel_licence(archive)
        converted = CONVERTERS[source.kind](text)
        folder.mkdir(parents=True, exist_ok=True)
        _write_csv(folder / "edges.csv", EDGE_COLUMNS, converted.edges)
        _write_csv(folder / "nodes.csv", NODE_COLUMNS, converted.nodes)
        record = {
            **asdict(source),
            "wheel": wheel.name,
            "licence": licence,
            "weight_is_distance": converted.weight_is_distance,
            "nodes": len(converted.nodes),
            "links": len(converted.edges),
            "left_out": converted.left_out,
        }
        record_path.write_text(json.dumps(record, indent=2), encoding="utf-8")
    record = json.loads(record_path.read_text(encoding="utf-8"))
    return RealNetwork(
        source.name,
        source.kind,
        folder / "edges.csv",
        folder / "nodes.csv",
        bool(record["weight_is_distance"]),
        record,
    )


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    parser.add_argument("--cache-dir", type=Path, default=DEFAULT_CACHE)
    parser.add_argument("--list", action="store_true", help="print each network's record")
    args = parser.parse_args(argv)
    args.cache_dir.mkdir(parents=True, exist_ok=True)
    ignore = args.cache_dir.parent / ".gitignore"
    if not ignore.exists():
        ignore.write_text("*\n", encoding="utf-8")
    for source in SOURCES:
        net = load(source, args.cache_dir)
        r = net.record
        print(
            f"{net.name:18} {r['kind']:8} {r['nodes']:>7} nodes {r['links']:>7} links  "
            f"{r['package']} {r['version']} {r['member']} ({r['licence']}) "
            f"left out: {r['left_out']}"
        )
    return 0


if __name__ == "__main__":
    sys.exit(main())
