"""The version of hfcore, in a leaf module so that any layer may read it."""

__version__ = "0.1.0"
