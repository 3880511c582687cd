"""Built-in scenarios: invented, complete circuits used by ``adlin demo`` and the tests."""

from .sensor_ldo import (
    LoopGain as LoopGain,
    ideal_output as ideal_output,
    sensor_ldo as sensor_ldo,
    sensor_ldo_loop as sensor_ldo_loop,
    sensor_ldo_system as sensor_ldo_system,
)
