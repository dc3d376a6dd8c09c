"""N-primary displays: model, transfer functions, white calibration and drive solving.

See :mod:`metasim.display.model` (the additive model and its Dataset layout),
:mod:`metasim.display.transfer`, :mod:`metasim.display.calibration` and :mod:`metasim.display.drive`.
"""

from metasim.display.calibration import WHITE_POINTS, calibrate_white, white_xy
from metasim.display.drive import STRATEGIES, lab_jacobian, solve_drive
from metasim.display.model import ASSUMPTION, Display, check_drive, make_display, stack_designs
from metasim.display.sources import SOURCE_SPACES, rgb_to_xyz, source_matrix
from metasim.display.transfer import TRANSFER_FUNCTIONS, eotf, eotf_inverse

__all__ = [
    "ASSUMPTION",
    "Display",
    "make_display",
    "stack_designs",
    "check_drive",
    "calibrate_white",
    "white_xy",
    "WHITE_POINTS",
    "TRANSFER_FUNCTIONS",
    "eotf",
    "eotf_inverse",
    "solve_drive",
    "STRATEGIES",
    "lab_jacobian",
    "SOURCE_SPACES",
    "source_matrix",
    "rgb_to_xyz",
]
