"""The files of the site (figures, their data, downloads) and the figure jobs pages register."""

from __future__ import annotations

import dataclasses
from dataclasses import dataclass, field
from typing import Sequence

from relspan.report.pages.addresses import dataset_path
from relspan.site import blocks
from relspan.site.content import SiteFile
from relspan.site.markdown import Raw, joined, md

__all__ = ["FigureJob", "Publisher"]

#: how a figure file's format is named in its download link
_FORMAT_NAMES = {"svg": "SVG", "png": "PNG"}


@dataclass(frozen=True, slots=True)
class FigureJob:
    """A figure to draw later (possibly in another process): ``fn(*args)`` -> FigureResult or None."""

    token: str
    fn: object
    args: tuple
    folder: str
    caption_markdown: str
    ident: str
    dataset_key: str


@dataclass
class Publisher:
    """Collects the files of the site (figures, their data CSVs, downloads).

    Figures are registered as jobs (descriptions: a function and its plain
    arguments) and placed in the page as a token; the driver draws them
    (:mod:`relspan.run.figures`, on an executor, with a cache) and
    :meth:`fill` puts the finished Markdown in place of each token.
    """

    fmt: str = "svg"
    #: further formats the driver writes beside each figure (``site.figure_files: both``)
    also: tuple = ()
    files: dict = field(default_factory=dict)
    jobs: list = field(default_factory=list)
    thumbs: list = field(default_factory=list)

    def add(self, path: str, data: bytes) -> str:
        self.files[path] = data
        return "/" + path

    def figure(self, fn, args: tuple, folder: str, caption_markdown: str = "", *, ident: str,
               dataset_key: str = "") -> Raw:
        """Register ``fn(*args)`` as a figure of ``folder``; returns its placeholder block.

        ``caption_markdown`` is escaped unless it is :class:`~relspan.site.markdown.Raw`.
        """
        token = f"@@relspan-figure-{len(self.jobs):05d}@@"
        self.jobs.append(FigureJob(token, fn, tuple(args), folder, caption_markdown, ident, dataset_key))
        return Raw(f"\n\n{token}\n\n")

    def thumbnail(self, result) -> Raw:
        """A small copy of one figure the dataset's page already shows (no new drawing).

        The first of these that was drawn: for each plan whose windows all support the same
        relations, the angles between its windows (how far the relations move); else the
        overview of the series. Resolved by :meth:`fill`.
        """
        folder = f"figures/{result.spec.id}"
        q = result.examined[0] if result.examined else None
        prefs = []
        if q is not None:
            for pid, *_ in result.summary.windowed:
                prefs.append((f"{pid}/angles/{q}", "How far the relations move between "
                              "windows (0\u00b0: they stay put)."))
        prefs.append(("overview", "The series analysed, each standardised."))
        token = f"@@relspan-thumb-{len(self.thumbs):05d}@@"
        self.thumbs.append((token, folder, tuple(prefs), "/" + dataset_path(result.spec.id)))
        return Raw(f"\n\n{token}\n\n")

    def _thumb_markdown(self, folder: str, prefs, drawn: dict, page: str) -> str:
        for ident, caption in prefs:
            hit = drawn.get((folder, ident))
            if hit is None:
                continue
            job, (name, alt, _description, _image, _csv, width, height, *_more) = hit
            # the long description and the numbers stay beside the full-size figure on the dataset page
            cap = md("{} [Full size]({}).", caption, Raw(page + ("#data" if ident == "overview" else "#stability")))
            return blocks.figure(f"/{job.folder}/{name}.{self.fmt}", alt, cap, width=width, height=height,
                                 css_class="thumb")
        return "\n\n"

    def _markdown(self, job: FigureJob, rendered) -> str:
        if rendered is None:
            return ""
        name, alt, description, image, csv_bytes, width, height, *more = rendered
        img = self.add(f"{job.folder}/{name}.{self.fmt}", image)
        csv = self.add(f"{job.folder}/{name}.csv", csv_bytes)
        files = {self.fmt: img}
        for fmt, data in (more[0] if more else ()):
            files[fmt] = self.add(f"{job.folder}/{name}.{fmt}", data)
        long = md("{}\n\nThe numbers behind this figure: [{}.csv]({}).", description, name, Raw(csv))
        links = [md("[{}]({})", _FORMAT_NAMES[f], Raw(files[f])) for f in sorted(files)]
        links.append(md("[the numbers (CSV)]({})", Raw(csv)))
        downloads = md("Download: {}", joined(links, " \u00b7 "))
        caption = (joined([job.caption_markdown, Raw("\n\n"), downloads]) if str(job.caption_markdown).strip()
                   else downloads)
        return blocks.figure(img, alt, caption, long_description_markdown=long,
                             width=width, height=height, link_image=True)

    def fill(self, pages: list, rendered: Sequence) -> list:
        """``pages`` with each figure token replaced by its finished Markdown.

        ``rendered[i]`` is what the driver drew for ``self.jobs[i]``
        (:func:`relspan.run.figures.draw_figures`), or None when the figure
        does not apply; the figure files are added to the site here.
        """
        snippets = {job.token: self._markdown(job, done) for job, done in zip(self.jobs, rendered)}
        drawn = {(job.folder, job.ident): (job, done) for job, done in zip(self.jobs, rendered) if done is not None}
        for token, folder, prefs, page in self.thumbs:
            snippets[token] = self._thumb_markdown(folder, prefs, drawn, page)
        out = []
        for page in pages:
            body = page.body_markdown
            if "@@relspan-figure-" in body or "@@relspan-thumb-" in body:
                for token, snippet in snippets.items():
                    if token in body:
                        body = body.replace(f"\n\n{token}\n\n", snippet or "\n\n")
                page = dataclasses.replace(page, body_markdown=body)
            out.append(page)
        return out

    def site_files(self) -> tuple[SiteFile, ...]:
        return tuple(SiteFile(p, d) for p, d in sorted(self.files.items()))
