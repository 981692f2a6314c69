"""The small interface through which the query language sees a corpus.

The checker resolves names against it and the compiler reads statistics and view
names from it. ``engine.store.Store`` implements it; tests may implement it with a
plain in-memory class (see ``StaticCatalog``).
"""
from __future__ import annotations

from dataclasses import dataclass, field
from typing import Protocol


@dataclass(frozen=True)
class AttrInfo:
    """One queryable column of a layer."""

    name: str                 # as written in a query: "form", "feats.Number"
    type: str = "str"         # "str", "int", "float", "bool"
    n_distinct: int | None = None
    n_null: int | None = None


@dataclass(frozen=True)
class LayerInfo:
    """A layer of nodes, or an edge set (kind == "edges")."""

    name: str                 # also the name of its SQL view
    kind: str                 # "sequence" (a segmentation: ord), "span", "tree", "edges"
    attrs: dict[str, AttrInfo] = field(default_factory=dict)
    rows: int = 0
    tree: bool = False        # has parent/depth/pre/post columns
    time: bool = False        # has t_start/t_end filled for (some) nodes
    readings: bool = False    # tree layer with alternative readings
    token_layer: str | None = None   # layer whose ordinals tok_first/tok_last count (surface tokens)
    word_layer: str | None = None    # layer whose ordinals word_first/word_last count (syntactic words)
    edge_sets: tuple[str, ...] = ()  # edge sets whose src/dst are nodes of this layer
    # ``sent`` holds the id of the node of this layer that the node lies inside (NULL: none known)
    sentence_layer: str | None = None
    sent_missing: int | None = None  # rows whose ``sent`` is NULL (None: not counted)
    separate: bool = False           # no two nodes share or touch a character (sentences)


class Catalog(Protocol):
    def layers(self) -> dict[str, LayerInfo]:
        """Every node layer and edge set by name."""

    def sentence_attrs(self) -> dict[str, AttrInfo]:
        """Attributes usable as ``sentence.X`` (columns of the ``sentence`` layer)."""

    def doc_attrs(self) -> dict[str, AttrInfo]:
        """Attributes usable as ``doc.X`` (columns of the ``doc`` view)."""


@dataclass
class StaticCatalog:
    """A catalog given as plain data, for tests and tools."""

    layer_map: dict[str, LayerInfo]
    sentence: dict[str, AttrInfo] = field(default_factory=dict)
    doc: dict[str, AttrInfo] = field(default_factory=dict)

    def layers(self) -> dict[str, LayerInfo]:
        return self.layer_map

    def sentence_attrs(self) -> dict[str, AttrInfo]:
        return self.sentence

    def doc_attrs(self) -> dict[str, AttrInfo]:
        return self.doc
