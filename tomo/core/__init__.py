"""Shared plumbing every stage may use: errors, atomic file writing, CSV/TOML reading, the version.

Imports nothing else from tomo.
"""
