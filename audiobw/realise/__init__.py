"""From a chosen passband to a board: sections, standard part values, their noise and yield.

An engineering starting point: parts, layout and op-amp behaviour (bandwidth, slew,
stability with capacitive loads) must be verified on the bench; defer to the
applicable product standards and licensed practice.
"""

from ..cautions import BOARD_CAUTION as CAUTION  # noqa: F401  (the realise modules take it from here)
