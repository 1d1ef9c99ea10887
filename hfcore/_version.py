"""The version of hfcore, in one place.

A leaf module (it imports nothing), so that the build backend reads it
without importing the package and every module that reports the version
reads it without importing the package root.
"""

__version__ = "0.1.0"
