"""Imported by the pool's fork server only (its preload list): it dies with the build.

Do not import this module anywhere else: importing it sets ``PR_SET_PDEATHSIG``
on the importing process (see :mod:`relspan.run._lifeline`).
"""

from relspan.run._lifeline import forkserver_start

forkserver_start()
