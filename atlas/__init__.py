"""The lineage atlas builder: a phylogenetic study of artefacts in, a linked static site out."""

__version__ = "0.1.0"
