"""One module per command group. Each module defines `register(subparsers)`.

`vetting.cli.main` discovers every module in this package, so adding a command never
means editing a shared file.
"""
