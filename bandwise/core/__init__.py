"""Floor 1, core: the model, the node graph, the DOF layout and the figures measured on them.

Core imports nothing else of bandwise.  Every floor above may import it.
"""
