"""The analysis model: a case turned into plain arrays (SI units).

Built once from a :class:`cablefe.spec.CaseSpec`; immutable afterwards.  It
holds the node coordinates, the DOF numbering, one element table per family
and the load vectors of every load case.  Nothing here knows TOML or units
text.
"""

from .build import build_model
from .tables import match_members
from .geometry import local_origin
# load-building internals, used by the moving-load studies
from .loads import EdgeIndex, PathChain, _LoadBuilder, add_path_load, path_chain  # noqa: F401
from .report import model_warnings, report_deck_nodes
from .tables import FAMILIES, ElementTable, LoadVectors, MemberInfo, Model

__all__ = ["FAMILIES", "ElementTable", "LoadVectors", "MemberInfo", "Model", "build_model",
           "local_origin", "match_members", "model_warnings", "report_deck_nodes"]
