"""gainboard.app: the command line and the browser workbench.

Kept light on import so the command line starts fast; Panel is imported only
by the modules that serve the workbench.
"""
