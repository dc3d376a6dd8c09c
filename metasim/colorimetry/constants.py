"""Published constants of colorimetry, one home for the models and the compiled kernels."""

#: CIELAB's ε = (6/29)³ and κ = (29/3)³, the exact values of CIE 15:2004 §8.2.1 / ISO/CIE 11664-4:2019.
CIELAB_EPSILON = 216.0 / 24389.0
CIELAB_KAPPA = 24389.0 / 27.0

__all__ = ["CIELAB_EPSILON", "CIELAB_KAPPA"]
