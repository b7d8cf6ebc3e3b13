"""Plain helper modules shared by several test modules (not collected as tests).

Test modules import them as `from helpers.<module> import ...`: pytest puts `tests/` on sys.path
(rootdir-relative "prepend" import mode, tests/ has no __init__.py), so this works both from the
repository root and from `cd tests && pytest`.
"""
