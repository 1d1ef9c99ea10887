"""The version of hfcore, in one place (a base module: anything may import it)."""

__version__ = "0.1.0"
