"""Reading GraphML files safely: entity declarations and external references refused.

GraphML (Brandes et al., "GraphML progress report", Graph Drawing 2001; the
format's specification at graphml.graphdrawing.org) is XML, and XML can carry
a document type declaration whose entities expand to gigabytes from a few
hundred bytes (the "billion laughs" expansion) or pull in other files and
network addresses (external entities). Both are refused here: the file is
parsed by the streaming SAX parser of :mod:`defusedxml` with entity
declarations and external references forbidden (OWASP XML External Entity
Prevention Cheat Sheet, common practice). A GraphML file has no need for
either.

What is read: the single ``<graph>`` of the file, its ``<node>`` elements
(the node table, column ``node``) and ``<edge>`` elements (the edge table,
columns ``source`` and ``target``, plus ``id`` when edges have ids), with one
column per declared ``<key>`` holding the ``<data>`` values as exact text
(the key's ``<default>`` where an element has no value; an empty cell where
there is neither). The two tables then go through the same checks as CSV
tables, and an error names the line of the element it concerns. Hyperedges,
ports and nested graphs have no meaning for a network of links and are
refused with their line. Whether edges marked directed keep their direction
is the reader's choice (:func:`specgraph.io.read_edges`, ``directed=``).
"""

from __future__ import annotations

import logging
import xml.sax
from collections.abc import Callable
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any
from xml.sax.handler import ContentHandler

import defusedxml
import defusedxml.sax
import pandas as pd

from ..exceptions import InputError

__all__ = ["GRAPHML_SUFFIXES", "read_graphml"]

logger = logging.getLogger(__name__)

#: File suffixes (lower case) read as GraphML.
GRAPHML_SUFFIXES = frozenset({".graphml"})
#: The GraphML namespace; elements in no namespace are accepted too.
GRAPHML_NAMESPACE = "http://graphml.graphdrawing.org/xmlns"
#: Elements that have no meaning for a network of links; refused with their line.
UNSUPPORTED_ELEMENTS = frozenset({"hyperedge", "port", "endpoint", "locator"})
_REFUSED_XML = (
    "the file declares XML entities or refers to outside resources ({what}); specgraph "
    "refuses these because they can expand without bound or read other files (XML "
    "entity expansion, external entities). A GraphML file needs neither: export it "
    "again without a document type declaration"
)


@dataclass(frozen=True)
class GraphMLTables:
    """The tables of a GraphML file, each with a line finder, and a record of the file."""

    edges: pd.DataFrame
    edge_lines: Callable[[int], int | None]
    nodes: pd.DataFrame
    node_lines: Callable[[int], int | None]
    record: dict[str, Any]


class _ElementLines:
    """Line finder: the line on which the element of each table row starts."""

    #: GraphML has no header row: messages about a column point at the first element.
    header_line: int | None
    #: Frame positions of columns mean nothing in XML: messages name the key only.
    column_numbers = False

    def __init__(self, lines: list[int]) -> None:
        self._lines = lines
        self.header_line = lines[0] if lines else None

    def __call__(self, row_position: int) -> int | None:
        if 0 <= row_position < len(self._lines):
            return self._lines[row_position]
        return None


@dataclass
class _Key:
    name: str
    domain: str
    default: str | None = None
    line: int | None = None
    key_id: str = ""


#: The tables a key's domain (its ``for`` attribute) gives a column in.
_TABLES_OF_DOMAIN = {"node": {"node"}, "edge": {"edge"}, "all": {"node", "edge"}}


@dataclass
class _State:
    keys: dict[str, _Key] = field(default_factory=dict)
    nodes: list[dict[str, str]] = field(default_factory=list)
    node_lines: list[int] = field(default_factory=list)
    edges: list[dict[str, str]] = field(default_factory=list)
    edge_lines: list[int] = field(default_factory=list)
    graphs: int = 0
    directed_default: bool = False
    directed_edges: int = 0
    root_seen: bool = False


class _Handler(ContentHandler):
    """SAX handler collecting keys, nodes and edges with the line of each element."""

    def __init__(self, path: Path) -> None:
        super().__init__()
        self.path = path
        self.state = _State()
        self._locator: Any = None
        self._stack: list[str] = []
        self._element: dict[str, str] | None = None
        self._element_kind = ""
        self._data_key: str | None = None
        self._key: _Key | None = None
        self._in_default = False
        self._text: list[str] = []

    # -- helpers
    def _line(self) -> int | None:
        return None if self._locator is None else int(self._locator.getLineNumber())

    def _fail(self, message: str) -> InputError:
        return InputError(message, path=self.path, line=self._line())

    def _required(self, attrs: Any, name: str, element: str) -> str:
        value = attrs.get(name)
        if value is None or value == "":
            raise self._fail(f"<{element}> has no '{name}' attribute; every {element} needs one")
        return str(value)

    # -- SAX events
    def setDocumentLocator(self, locator: Any) -> None:
        self._locator = locator

    def startElementNS(self, name: tuple[str | None, str], qname: Any, attrs: Any) -> None:
        uri, local = name
        plain = {key[1]: value for key, value in attrs.items() if key[0] is None}
        if not self.state.root_seen:
            if local != "graphml" or uri not in (GRAPHML_NAMESPACE, None):
                raise self._fail(
                    f"the file's root element is <{local}>, expected <graphml>; this is "
                    "not a GraphML file (give a CSV or Parquet edge table instead)"
                )
            self.state.root_seen = True
        if uri not in (GRAPHML_NAMESPACE, None):
            # Elements of other vocabularies (drawing extensions) carry no network data.
            self._stack.append("")
            return
        parent = self._stack[-1] if self._stack else ""
        self._stack.append(local)
        if local in UNSUPPORTED_ELEMENTS:
            raise self._fail(
                f"<{local}> is not supported: a network here is made of nodes and "
                "two-ended links; convert the file to plain nodes and edges"
            )
        if local == "key":
            self._start_key(plain)
        elif local == "default" and self._key is not None:
            self._in_default = True
            self._text = []
        elif local == "graph":
            self._start_graph(plain, parent)
        elif local == "node":
            self._start_node(plain, parent)
        elif local == "edge":
            self._start_edge(plain, parent)
        elif local == "data":
            self._start_data(plain)

    def _start_key(self, attrs: dict[str, str]) -> None:
        key_id = self._required(attrs, "id", "key")
        domain = attrs.get("for", "all")
        name = attrs.get("attr.name") or key_id
        line = self._line()
        earlier = self.state.keys.get(key_id)
        if earlier is not None:
            raise self._fail(
                f"<key id={key_id!r}> is declared again (first on line {earlier.line}); key "
                "ids must be unique in a GraphML file (GraphML specification); give this key "
                "another id, or remove one of the two"
            )
        self._refuse_same_name(key_id, name, domain)
        self._key = _Key(name=name, domain=domain, line=line, key_id=key_id)
        self.state.keys[key_id] = self._key

    def _refuse_same_name(self, key_id: str, name: str, domain: str) -> None:
        """Refuse a second key whose attribute name fills a column of the same table.

        Two keys named alike for edges (or one for edges, one for all) would give
        one column two meanings, and only one of them could be kept: the file is
        ambiguous. The GraphML specification identifies keys by their ``id``;
        ``attr.name`` is the attribute's name for programs that read the data
        (GraphML Primer, section "GraphML-Attributes").
        """
        tables = _TABLES_OF_DOMAIN.get(domain, set())
        for other in self.state.keys.values():
            shared = tables & _TABLES_OF_DOMAIN.get(other.domain, set())
            if other.name == name and shared:
                what = "edges" if "edge" in shared else "nodes"
                raise self._fail(
                    f"<key id={key_id!r}> declares the {what}' attribute {name!r}, which "
                    f"<key id={other.key_id!r}> on line {other.line} declares already; "
                    "their values would fill one column and only one could be kept. Give "
                    "each key its own attr.name, or merge the two keys into one"
                )

    def _start_graph(self, attrs: dict[str, str], parent: str) -> None:
        if parent != "graphml":
            raise self._fail(
                "nested graphs are not supported: a node holds a <graph> here; "
                "flatten the file into one graph"
            )
        self.state.graphs += 1
        if self.state.graphs > 1:
            raise self._fail("the file holds more than one <graph>; give one network per file")
        self.state.directed_default = attrs.get("edgedefault", "undirected") == "directed"

    def _start_node(self, attrs: dict[str, str], parent: str) -> None:
        if parent != "graph":
            raise self._fail(f"<node> inside <{parent}>; nodes belong directly in <graph>")
        line = self._line()
        self._element = {"node": self._required(attrs, "id", "node")}
        self._element_kind = "node"
        self.state.nodes.append(self._element)
        self.state.node_lines.append(line if line is not None else 0)

    def _start_edge(self, attrs: dict[str, str], parent: str) -> None:
        if parent != "graph":
            raise self._fail(f"<edge> inside <{parent}>; edges belong directly in <graph>")
        line = self._line()
        self._element = {
            "source": self._required(attrs, "source", "edge"),
            "target": self._required(attrs, "target", "edge"),
        }
        if "id" in attrs:
            self._element["id"] = attrs["id"]
        directed = attrs.get("directed")
        if directed == "true" or (directed is None and self.state.directed_default):
            self.state.directed_edges += 1
        self._element_kind = "edge"
        self.state.edges.append(self._element)
        self.state.edge_lines.append(line if line is not None else 0)

    def _start_data(self, attrs: dict[str, str]) -> None:
        key_id = self._required(attrs, "key", "data")
        if self._element is None:
            self._data_key = None  # data of the graph or the file itself: not a table cell
            return
        key = self.state.keys.get(key_id)
        if key is None:
            raise self._fail(
                f"<data key={key_id!r}> refers to no <key> declared before it; declare "
                "the key at the top of the file"
            )
        if key.domain not in (self._element_kind, "all"):
            raise self._fail(
                f"key {key_id!r} ({key.name!r}) is declared for={key.domain!r} but used "
                f"on an <{self._element_kind}>"
            )
        self._data_key = key_id
        self._text = []

    def characters(self, content: str) -> None:
        if self._data_key is not None or self._in_default:
            self._text.append(content)

    def endElementNS(self, name: tuple[str | None, str], qname: Any) -> None:
        local = self._stack.pop() if self._stack else ""
        if local == "data" and self._data_key is not None and self._element is not None:
            column = self.state.keys[self._data_key].name
            self._element[column] = "".join(self._text)
            self._data_key = None
        elif local == "default" and self._in_default and self._key is not None:
            self._key.default = "".join(self._text)
            self._in_default = False
        elif local == "key":
            self._key = None
        elif local in ("node", "edge"):
            self._element = None


def _table(
    rows: list[dict[str, str]], first: list[str], keys: list[_Key], kind: str
) -> pd.DataFrame:
    """Rows as a frame of text: fixed columns first, then one per key, defaults filled."""
    columns = list(first)
    for key in keys:
        if key.domain in (kind, "all") and key.name not in columns:
            columns.append(key.name)
    defaults = {key.name: key.default for key in keys if key.domain in (kind, "all")}
    data: dict[str, list[str]] = {}
    for column in columns:
        fallback = defaults.get(column)
        data[column] = [row.get(column, "" if fallback is None else fallback) for row in rows]
    return pd.DataFrame(data, columns=columns, dtype=object)


def read_graphml(path: Path) -> GraphMLTables:
    """Read the node and edge tables of a GraphML file, refusing unsafe XML.

    Parameters
    ----------
    path : Path
        The GraphML file.

    Returns
    -------
    GraphMLTables
        The edge table (``source``, ``target``, ``id`` when edges have ids,
        one column per edge key by its ``attr.name``) and the node table
        (``node`` and one column per node key), every cell as exact text, and
        a record (format, counts, whether the file said its edges are
        directed).

    Raises
    ------
    InputError
        For a file that is not well-formed XML or not GraphML, that declares
        entities or refers to outside resources, that holds unsupported
        elements (hyperedges, ports, nested graphs) or data of undeclared
        keys; the message names the file and line.

    References
    ----------
    .. [1] U. Brandes, M. Eiglsperger, I. Herman, M. Himsolt and M. S. Marshall,
       "GraphML progress report: structural layer proposal", Graph Drawing 2001,
       LNCS 2265, pp. 501-512.
    .. [2] OWASP, "XML External Entity Prevention Cheat Sheet".
    """
    handler = _Handler(path)
    parser = defusedxml.sax.make_parser()
    parser.forbid_dtd = False
    parser.forbid_entities = True
    parser.forbid_external = True
    parser.setFeature(xml.sax.handler.feature_namespaces, True)
    parser.setContentHandler(handler)
    try:
        parser.parse(str(path))
    except defusedxml.DefusedXmlException as exc:
        raise InputError(
            _REFUSED_XML.format(what=_refusal(exc)), path=path, line=handler._line()
        ) from None
    except xml.sax.SAXParseException as exc:
        raise InputError(
            f"this is not well-formed XML ({exc.getMessage()}) at column "
            f"{(exc.getColumnNumber() or 0) + 1}; check the file or export it again",
            path=path,
            line=exc.getLineNumber(),
        ) from None
    state = handler.state
    if state.graphs == 0:
        raise InputError("the file holds no <graph> element; nothing to read", path=path, line=None)
    keys = list(state.keys.values())
    first = ["source", "target"] + (["id"] if any("id" in e for e in state.edges) else [])
    edges = _table(state.edges, first, keys, "edge")
    nodes = _table(state.nodes, ["node"], keys, "node")
    record: dict[str, Any] = {
        "path": str(path),
        "format": "graphml",
        "nodes": len(state.nodes),
        "edges": len(state.edges),
        "directed_edges": state.directed_edges,
    }
    return GraphMLTables(
        edges,
        _ElementLines(state.edge_lines),
        nodes,
        _ElementLines(state.node_lines),
        record,
    )


def _refusal(exc: Exception) -> str:
    """Which unsafe construct the parser met, in words."""
    if isinstance(exc, defusedxml.EntitiesForbidden):
        return f"entity {exc.name!r} declared"
    if isinstance(exc, defusedxml.ExternalReferenceForbidden):
        return f"external reference to {exc.sysid!r}"
    if isinstance(exc, defusedxml.DTDForbidden):
        return "document type declaration"
    return type(exc).__name__
