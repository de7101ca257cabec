"""Floor 4, faces: the command line and the HTML report.

Faces parse options and render results; they compute nothing themselves.
"""
