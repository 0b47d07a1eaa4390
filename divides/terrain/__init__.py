"""Grid hydrology: conditioning, D8 routing, order, accumulation."""

from divides.terrain.conditioning import Conditioned, condition, fill_depressions, outlet_mask
from divides.terrain.routing import FlowGraph, route

__all__ = ["Conditioned", "FlowGraph", "condition", "fill_depressions", "outlet_mask", "route"]
