"""prescribe: screening rules, bone-loading dose models and a progression planner
for graded exercise programs in adults with low bone density.

This package supports, and does not replace, licensed clinical judgment.
"""

__version__ = "0.1.0"
