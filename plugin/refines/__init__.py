"""pytest-refines: prove that Python functions refine their specifications.

The public surface is deliberately tiny; everything else in this package is
internal and may change without notice.
"""

from refines.declare import attach, old, refines

__all__ = ["attach", "old", "refines"]
