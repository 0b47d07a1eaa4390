"""Forward model: stream-power landscape evolution with hillslope diffusion and divide tracking."""

from divides.model.diffusion import diffusion_step
from divides.model.forcing import EdgeCondition, closed_edge, open_edge
from divides.model.simulate import MassBudget, SimulationResult, simulate
from divides.model.stream_power import stream_power_step
from divides.model.tracking import DivideTrack, divide_positions, edge_catchments

__all__ = [
    "DivideTrack",
    "EdgeCondition",
    "MassBudget",
    "SimulationResult",
    "closed_edge",
    "diffusion_step",
    "divide_positions",
    "edge_catchments",
    "open_edge",
    "simulate",
    "stream_power_step",
]
