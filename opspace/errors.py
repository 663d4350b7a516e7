"""Errors raised on bad input.

`ConfigError` is for a description, scenario or catalogue file that is wrong:
its message names the file, the key (or URDF element), the value found and
what was expected.  `ModelError` is for a model that loads but cannot be used
(for example a mass matrix that is not positive definite at some state).
Both are `ValueError`s so that generic callers can catch them together.
"""

__all__ = ["ConfigError", "ModelError"]


class ConfigError(ValueError):
    """A user file or argument is invalid; the message says where and why."""


class ModelError(ValueError):
    """The model cannot be evaluated as asked; the message says where and why."""
