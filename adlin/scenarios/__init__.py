"""Built-in scenarios: invented, complete circuits used by ``adlin demo`` and the tests."""

from .sensor_ldo import LoopGain as LoopGain
from .sensor_ldo import ideal_output as ideal_output
from .sensor_ldo import predicted_error as predicted_error
from .sensor_ldo import sensor_ldo as sensor_ldo
from .sensor_ldo import sensor_ldo_loop as sensor_ldo_loop
from .sensor_ldo import sensor_ldo_system as sensor_ldo_system
