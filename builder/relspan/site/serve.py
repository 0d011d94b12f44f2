"""``relspan serve``: preview a built site on 127.0.0.1 only.

Only the site's own files are served: a path that resolves (through symbolic
links) outside the folder, a hidden name (``.relspan-site``, ``.git``, ...) and
a folder without an ``index.html`` are answered 404, never listed.
"""

from __future__ import annotations

import functools
import http.server
import os
import posixpath
import sys
import urllib.parse
from pathlib import Path

from relspan.errors import OptionsError

__all__ = ["serve_folder", "make_server"]


class _QuietHandler(http.server.SimpleHTTPRequestHandler):
    def log_message(self, format: str, *args) -> None:  # noqa: A002 - signature from the stdlib
        pass

    def _allowed(self) -> bool:
        """Whether the request names a file of the site itself."""
        path = urllib.parse.unquote(urllib.parse.urlsplit(self.path).path)
        parts = [p for p in posixpath.normpath(path).split("/") if p not in ("", ".")]
        if any(p.startswith(".") for p in parts):
            return False  # hidden files and folders (the marker, editor and VCS files)
        root = os.path.realpath(self.directory)
        target = os.path.realpath(self.translate_path(self.path))
        if target != root and not target.startswith(root + os.sep):
            return False  # a symbolic link out of the folder
        if os.path.isdir(target) and not os.path.isfile(os.path.join(target, "index.html")):
            return False  # no listings of folders
        return True

    def send_head(self):
        if not self._allowed():
            self.send_error(404, "File not found")
            return None
        return super().send_head()

    def list_directory(self, path):  # never reached for allowed paths; a guard all the same
        self.send_error(404, "File not found")
        return None


def make_server(folder: Path, port: int = 0) -> http.server.ThreadingHTTPServer:
    """A threaded HTTP server for ``folder`` bound to 127.0.0.1 (never another interface)."""
    folder = Path(folder)
    if not folder.is_dir():
        raise OptionsError(f"{folder} is not a folder.", path=str(folder),
                           fix="give the folder a `relspan build` wrote, e.g. `relspan serve site_demo`.")
    if not (folder / "index.html").is_file():
        raise OptionsError(f"{folder} has no index.html, so it is not a built site.", path=str(folder),
                           fix="run `relspan build SPEC` first, then serve its output folder.")
    handler = functools.partial(_QuietHandler, directory=str(folder))
    try:
        return http.server.ThreadingHTTPServer(("127.0.0.1", port), handler)
    except OSError as err:
        raise OptionsError(f"cannot listen on 127.0.0.1:{port}: {err.strerror}.", key="--port",
                           fix="choose another --port, or --port 0 for any free port.") from None


def serve_folder(folder: Path, port: int = 0) -> None:
    """Serve until Ctrl-C (KeyboardInterrupt propagates to the command line)."""
    server = make_server(folder, port)
    host, real_port = server.server_address[:2]
    print(f"serving {folder} at http://{host}:{real_port}/ (Ctrl-C stops)", file=sys.stderr)
    try:
        server.serve_forever()
    finally:
        server.server_close()
