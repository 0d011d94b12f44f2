"""Run the relspan command line with the site writer paused part-way, for crash-safety tests.

    python tests/corpus/paused_cli.py FLAG AFTER_FILES -- build spec.yaml --jobs 1 ...

Runs :func:`relspan.cli.main` unchanged except that :func:`relspan.site.writer.write_site`
gets its test hook (``_after_each_file``): after AFTER_FILES files of the new site are
written into the writer's temporary folder, the hook writes FLAG (a file the test waits
for) and sleeps, so the test can kill or interrupt the build at exactly that point.
"""

from __future__ import annotations

import sys
import time
from pathlib import Path


def main(argv: list[str]) -> int:
    flag, after, sep, *cli_args = argv
    if sep != "--":
        raise SystemExit("usage: paused_cli.py FLAG AFTER_FILES -- RELSPAN ARGS")
    import relspan.site
    import relspan.site.writer as writer
    from relspan.cli import main as cli_main

    real = writer.write_site
    count = [0]

    def hook(rel: str) -> None:
        count[0] += 1
        if count[0] == int(after):
            Path(flag).write_text(rel, encoding="utf-8")
            time.sleep(120)

    def paused(files, out_dir, **kwargs):
        return real(files, out_dir, _after_each_file=hook, **kwargs)

    writer.write_site = paused
    relspan.site.write_site = paused
    return cli_main(cli_args)


if __name__ == "__main__":
    raise SystemExit(main(sys.argv[1:]))
