"""Tables on the pages: Markdown pipe tables, each with the same table as a CSV download."""

from __future__ import annotations

import csv as csv_module
import html
import io
import json
import re

from relspan.site.markdown import Raw, table as md_table

__all__ = ["table", "plain_cell", "table_csv_bytes", "json_bytes"]

_TAG = re.compile(r"<[^>]+>")
_MD_LINK = re.compile(r"\[([^\]]*)\]\([^)]*\)")
_MD_ESCAPE = re.compile(r"\\(.)")


def table(header, rows, *, csv: tuple | None = None) -> Raw:
    """A Markdown pipe table; cells are escaped unless :class:`~relspan.site.markdown.Raw`.

    With ``csv=(publisher, path)`` the same table (as shown, in plain text) is
    also written to ``path`` as CSV and linked under the table, so every table
    on the site can be downloaded.
    """
    out = md_table(header, rows)
    if csv is not None:
        pub, path = csv
        from relspan.site.markdown import cell

        link = pub.add(path, table_csv_bytes([cell(h) for h in header], [[cell(c) for c in r] for r in rows]))
        out += Raw(f"\n<p class=\"table-csv\" markdown=\"1\">[This table as CSV]({link})</p>\n")
    return out


def plain_cell(markdown_cell: str) -> str:
    """The text a reader sees in a table cell (links, code marks, tags and escapes removed)."""
    text = _TAG.sub("", markdown_cell)
    text = _MD_LINK.sub(r"\1", text)
    text = text.replace("`", "")
    text = _MD_ESCAPE.sub(r"\1", text)
    text = html.unescape(text).replace("\u2212", "-")
    return " ".join(text.split())


def table_csv_bytes(header, rows) -> bytes:
    """CSV (UTF-8, LF line ends) of a table given as Markdown cells."""
    buf = io.StringIO()
    w = csv_module.writer(buf, lineterminator="\n")
    w.writerow([plain_cell(h) for h in header])
    for r in rows:
        w.writerow([plain_cell(c) for c in r])
    return buf.getvalue().encode("utf-8")


def json_bytes(obj) -> bytes:
    """Deterministic JSON: sorted keys, UTF-8, newline at the end."""
    return (json.dumps(obj, sort_keys=True, ensure_ascii=False, indent=1, allow_nan=False) + "\n").encode()
