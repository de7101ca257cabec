"""Floor 2, algorithms: orderings, mesh checks, supports and zero-energy modes.

Each algorithm is a module with its paper.  Algorithms import only core.
"""
