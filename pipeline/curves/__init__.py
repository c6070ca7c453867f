"""Zero curves, one per as-of day, behind one interface whose primitive is the discount factor.

Public API:

* :class:`CurveSet` - ``discount``, ``zero_rate``, ``forward_rate``, ``instantaneous_forward``
* :func:`build_curves` - quotes ``(D, T)`` to a :class:`CurveSet` with a chosen method
* :func:`curves_from_nodes` - a :class:`CurveSet` from node times and zero rates
* :func:`nss_curves` - a :class:`CurveSet` from stored Nelson-Siegel-Svensson parameters
* :func:`node_zero_rates` - continuous zero rates implied by zero / discount / simple quotes
* methods: ``linear_zero``, ``log_linear_discount``, ``monotone_convex``, ``cubic_zero``, ``nss``
  (one module each; their docstrings state the extrapolation rule)
"""

from pipeline.curves.base import Block, CurveSet
from pipeline.curves.build import BLOCKS, build_curves, curves_from_nodes, node_zero_rates, nss_curves

__all__ = [
    "BLOCKS", "Block", "CurveSet", "build_curves", "curves_from_nodes", "node_zero_rates", "nss_curves",
]
