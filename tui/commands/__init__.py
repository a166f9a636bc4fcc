"""One module per command; each has ``configure(parser)`` and ``run(args) -> int``.

``tui.cli`` imports a command's module only when that command runs, so
``keyproof --help`` stays fast and one command's imports never slow another.
"""
