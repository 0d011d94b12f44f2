"""Tests of relspan.run (a package, so that worker processes can import tests.run._tasks helpers)."""
