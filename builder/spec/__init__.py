"""Spec: YAML text -> validated, frozen :class:`~builder.spec.model.Spec`."""

from builder.spec.model import *  # noqa: F401,F403
from builder.spec.model import __all__ as _model_all

__all__ = list(_model_all)
