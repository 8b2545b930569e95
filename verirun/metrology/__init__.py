"""Pure arithmetic of verification: scale laws, windows, uncertainty, decision rules.

Nothing in this package performs I/O, reads a clock or holds global state.
"""
