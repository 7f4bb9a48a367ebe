"""Layer stacks and model files."""
from .layers import Layer, OpticalInputs, Stack

__all__ = ["Layer", "Stack", "OpticalInputs"]
