"""River profiles: χ, concavity, steepness (ksn) and knickpoints."""

from divides.profiles.analysis import ProfileAnalysis, Stream, analyse_profiles
from divides.profiles.chi import ChiWeights, chi_at_first_channel, chi_weights, integrate_chi
from divides.profiles.concavity import (
    REFERENCE_THETA,
    ConcavityEstimate,
    bounded_by_data,
    concavity_by_collinearity,
    concavity_by_slope_area,
    disorder,
)
from divides.profiles.segments import Segmentation, segment_profile

__all__ = [
    "REFERENCE_THETA",
    "ChiWeights",
    "ConcavityEstimate",
    "ProfileAnalysis",
    "Segmentation",
    "Stream",
    "analyse_profiles",
    "bounded_by_data",
    "chi_at_first_channel",
    "chi_weights",
    "concavity_by_collinearity",
    "concavity_by_slope_area",
    "disorder",
    "integrate_chi",
    "segment_profile",
]
