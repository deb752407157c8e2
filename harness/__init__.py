"""tauproof: verification of hand-calculated step responses of linear lumped circuits."""

__version__ = "0.1.0"
