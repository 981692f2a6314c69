"""Alignment of incoming layers onto a document's primary text and time line.

Layers from other tools never agreed on tokens or on time. ``sequence`` aligns a
layer's leaves to the primary text by characters (after ``normalise``), ``anchor``
carries anchors across the two axes (time onto text nodes, characters onto time
nodes), and ``report`` counts how well each layer aligned and refuses poor ones.
"""
