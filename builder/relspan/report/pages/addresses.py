"""The site's URL scheme: where each page and download lives (site-root-relative paths)."""

from __future__ import annotations

__all__ = ["HOME", "dataset_path", "window_path", "csv_path", "plan_anchor"]

#: the home page's breadcrumb
HOME = ("Home", "index.html")


def dataset_path(ds_id: str) -> str:
    return f"datasets/{ds_id}/index.html"


def window_path(ds_id: str, plan_id: str, i: int) -> str:
    """The page of window ``i`` (0-based) of a plan."""
    return f"datasets/{ds_id}/{plan_id}/window-{i + 1:02d}.html"


def csv_path(ds_id: str, name: str) -> str:
    """A table's CSV download on a dataset page."""
    return f"data/{ds_id}/tables/{name}.csv"


def window_csv_base(ds_id: str, plan_id: str, i: int) -> str:
    """Stem of the CSV downloads of window ``i``'s tables (``<stem>-<table>.csv``)."""
    return f"data/{ds_id}/tables/{plan_id}/window-{i + 1:02d}"


def plan_anchor(plan_id: str) -> str:
    """The fragment id of a plan's section on its dataset page."""
    return f"plan-{plan_id}"
