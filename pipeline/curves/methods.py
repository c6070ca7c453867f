"""The interpolation methods, registered once: a name and the :class:`~pipeline.curves.base.Block` that
answers discount factors for it. The config's allowed ``interpolation`` values are these names.

``nss`` is fitted per day (:mod:`pipeline.curves.nss`) rather than interpolated through the nodes; its
par quotes are first bootstrapped with :data:`NSS_BOOTSTRAP_METHOD`.
"""

from __future__ import annotations

from pipeline.curves.base import Block
from pipeline.curves.cubic_zero import CubicZeroBlock
from pipeline.curves.linear_zero import LinearZeroBlock
from pipeline.curves.log_linear_discount import LogLinearDiscountBlock
from pipeline.curves.monotone_convex import MonotoneConvexBlock

__all__ = ["BLOCKS", "FITTED", "METHOD_NAMES", "NSS_BOOTSTRAP_METHOD"]

# methods that interpolate through the nodes
BLOCKS: dict[str, type[Block]] = {
    "linear_zero": LinearZeroBlock,
    "log_linear_discount": LogLinearDiscountBlock,
    "monotone_convex": MonotoneConvexBlock,
    "cubic_zero": CubicZeroBlock,
}
# methods fitted to the nodes
FITTED = ("nss",)
METHOD_NAMES = (*BLOCKS, *FITTED)
NSS_BOOTSTRAP_METHOD = "monotone_convex"
