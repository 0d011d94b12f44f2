"""Analysis core: pure numpy/scipy functions, one module per method family.

Nothing here reads files, prints or plots. Inputs are window statistics
(:class:`~builder.analysis.moments.Moments`) or covariance matrices; outputs
are small frozen result dataclasses.
"""

from builder.analysis.moments import Moments, MomentTree, merge, merge_all, moments_of

__all__ = ["Moments", "MomentTree", "merge", "merge_all", "moments_of"]
