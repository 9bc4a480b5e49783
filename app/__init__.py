"""gainboard.app: the command line and the browser workbench.

Kept light on import so the command line starts fast; Panel is imported only
by the modules that serve the workbench. Importing this package changes nothing
in the process (no environment variables, no BLAS threads): ``gainboard serve``
limits BLAS to one thread in its own process (see :func:`gainboard.app.cli.command_serve`).
"""
