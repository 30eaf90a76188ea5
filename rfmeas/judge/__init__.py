"""Judging a fitted transformer: figures of merit, the design check, the turns planner."""
