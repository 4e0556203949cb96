"""What a fitted model says: effects, curves, retransformation, residual checks, the units check."""
