"""Shared pytest set-up: this folder is on sys.path, so tests import ``moment_oracles``."""
