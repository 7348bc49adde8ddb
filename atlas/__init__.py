"""The lineage atlas builder: a phylogenetic study of artefacts in, a linked static site out.

The Python API for notebooks::

    import atlas
    study = atlas.load("content")                 # read and link an atlas source
    results = atlas.analyse(study)                # summary tree, support, reconstructions
    atlas.build("content", out="build", profile="public")
    sample = atlas.read_trees("trees.nex", burnin=0.25)
    sample.split_frequencies()                    # {frozenset of labels: frequency}
    tree = atlas.summary_tree(sample, method="majority")
"""

from __future__ import annotations

__version__ = "0.1.0"

# Import the pipeline module now, so that the function ``build`` below replaces the submodule
# attribute that Python sets on the package when ``atlas.build`` is first imported; imported
# later (by ``load``), the submodule would hide the function.
from . import build as _pipeline  # noqa: E402, F401


def load(directory, profile: str = "public"):
    """Read and link the atlas source in ``directory``; return the linked :class:`Atlas`."""
    from .build import load as _load

    return _load(directory, profile)


def analyse(study):
    """Analyse a linked atlas: summary tree, clade support, parsimony, likelihood."""
    from .analysis.results import analyse as _analyse

    return _analyse(study)


def build(directory, out="build", profile: str = "public"):
    """Build the site of ``directory`` into ``out`` with the named profile."""
    from .build import build as _build

    return _build(directory, out, profile)


def read_trees(path, burnin: float = 0.0, thin: int = 1):
    """Read a Newick or NEXUS tree file (one tree or a posterior sample)."""
    from .sources.trees import read_tree_file

    return read_tree_file(path, burnin=burnin, thin=thin)


def summary_tree(sample, method: str = "majority", outgroup=()):
    """The majority-rule consensus (``"majority"``) or MCC tree (``"mcc"``) of a sample."""
    from .analysis.consensus import majority_rule, mcc_tree

    if method == "majority":
        return majority_rule(sample, outgroup=outgroup)
    if method == "mcc":
        return mcc_tree(sample, outgroup=outgroup)
    raise ValueError(f"method must be 'majority' or 'mcc', not {method!r}")
