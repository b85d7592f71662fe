"""Surface flux transport: evolve the radial field with rotation, flow, diffusion and new regions."""

from .ensemble import TransportEnsemble
from .model import CARRINGTON_PERIOD_DAYS, FluxTransport, model_grid
from .profiles import (
    CARRINGTON_RATE_DEG_PER_DAY,
    SNODGRASS_1983_MAGNETIC,
    snodgrass_rotation,
    van_ballegooijen_flow,
)
from .sources import JOY_SLOPE, BipolarRegion, joy_tilt, region_field

__all__ = [
    "FluxTransport",
    "TransportEnsemble",
    "BipolarRegion",
    "joy_tilt",
    "JOY_SLOPE",
    "region_field",
    "model_grid",
    "snodgrass_rotation",
    "van_ballegooijen_flow",
    "SNODGRASS_1983_MAGNETIC",
    "CARRINGTON_RATE_DEG_PER_DAY",
    "CARRINGTON_PERIOD_DAYS",
]
