"""Fenwick pipe-liner lab's sweepshell plug-in: the ``elastic_ring`` model."""

from fenwick_rings.model import ElasticRingModel

__all__ = ["ElasticRingModel"]
