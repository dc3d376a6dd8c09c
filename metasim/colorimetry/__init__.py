"""Colorimetry: tristimulus integration, chromaticity, CIELAB and colour-difference kernels."""

from metasim.colorimetry.cielab import LAB, lab_to_lch, xy_to_xyz, xyz_to_lab, xyz_to_uv, xyz_to_xy
from metasim.colorimetry.difference import delta_e_2000, delta_e_2000_array
from metasim.colorimetry.ictcp import ICTCP, delta_e_itp, xyz_to_ictcp
from metasim.colorimetry.tristimulus import K_M, SCALES, cone_excitations, contract, tristimulus

__all__ = [
    "LAB",
    "K_M",
    "SCALES",
    "tristimulus",
    "cone_excitations",
    "contract",
    "xyz_to_xy",
    "xyz_to_uv",
    "xy_to_xyz",
    "xyz_to_lab",
    "lab_to_lch",
    "delta_e_2000",
    "delta_e_2000_array",
    "ICTCP",
    "xyz_to_ictcp",
    "delta_e_itp",
]
