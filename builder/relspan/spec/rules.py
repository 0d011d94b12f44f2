"""Cross-field rules of a spec, checked after the schema walk; builds the dataclasses.

The schema cannot state these: ids unique (datasets, window plans, periods,
claims), references resolve (a dataset's plans, a claim's dataset, plan and
variables), fields consistent with a plan's or a claim's kind, checks
consistent with a dataset's variables (noise shares for the shaped
assumption, the normalising variable, coranks below the number of
variables), dates of the calendar in order, and source files present and
inside the spec's folder. Each problem is a located
:class:`~relspan.errors.SpecError`; a spec that passes becomes the frozen
dataclasses of :mod:`relspan.spec.model`, with their defaults.
"""

from __future__ import annotations

import datetime as _dt
import difflib
from pathlib import Path
from typing import Any, Iterable

from relspan.spec._yamlpos import LineDict, LineList
from relspan.spec.model import (
    ChecksSpec,
    ResamplingSpec,
    ClaimSpec,
    DatasetSpec,
    Period,
    ReportMeta,
    RunSpec,
    SiteSpec,
    Span,
    Spec,
    TimeSpec,
    Tolerance,
    VariableSpec,
    WindowPlanSpec,
)
from relspan.spec.schema import SPAN_UNITS
from relspan.spec.validate import Context, inline_yaml

__all__ = ["build_spec"]

_CLAIM_COMMON = ("id", "kind", "text", "dataset", "plan")
#: fields each claim kind may use besides the common ones
_CLAIM_FIELDS = {
    "corank": ("assumption", "equals", "at_least", "at_most"),
    "subspace_stable": ("assumption", "corank", "below_deg"),
    "sign_stable": ("assumption", "normalise_on", "variable", "sign"),
    "coefficient_bounded": ("assumption", "normalise_on", "variable"),
    "no_break": ("assumption",),
}
#: assumption a claim kind uses when it names none (None: it must name one)
_CLAIM_DEFAULT_ASSUMPTION = {
    "corank": None,
    "subspace_stable": "equal",
    "sign_stable": "elementary",
    "coefficient_bounded": "diagonal",
    "no_break": "equal",
}


def build_spec(raw: LineDict, text: str, ctx: Context) -> Spec:
    """Cross-check a schema-valid parsed spec and build the frozen :class:`Spec`.

    Parameters
    ----------
    raw : LineDict
        The parsed spec, already checked against the schema.
    text : str
        The spec's text (kept on the result).
    ctx : Context
        The spec file's name and folder (relative paths resolve against it).

    Raises
    ------
    SpecError
        The first rule broken, located by line and key path, with a fix.
    """
    return _Builder(raw, text, ctx).build()


# --------------------------------------------------------------------------- helpers


def _line(m: Any, k: str, default: int) -> int:
    if isinstance(m, LineDict):
        return m.key_lines.get(k, m.line)
    return default


def _item_line(seq: Any, i: int, default: int) -> int:
    if isinstance(seq, LineList) and i < len(seq.item_lines):
        return seq.item_lines[i]
    return default


def _nearest(word: str, options: Iterable[str]) -> str:
    near = difflib.get_close_matches(word, list(options), n=1, cutoff=0.6)
    return f" Did you mean '{near[0]}'?" if near else ""


def _iso_date(text: str) -> _dt.date | None:
    try:
        return _dt.date.fromisoformat(text)
    except ValueError:
        return None


def _span(value: Any) -> Span | None:
    if value is None:
        return None
    if not isinstance(value, str):
        return Span(int(value), "rows")
    count, unit = value.split()
    unit = unit if unit.endswith("s") else unit + "s"
    assert unit in SPAN_UNITS
    return Span(int(count), unit)


class _Builder:
    """Cross-checks the schema-valid raw spec and builds the dataclasses."""

    def __init__(self, raw: LineDict, text: str, ctx: Context) -> None:
        self.raw = raw
        self.text = text
        self.ctx = ctx
        self.err = ctx.error

    # -- whole spec --------------------------------------------------------------------

    def build(self) -> Spec:
        raw = self.raw
        report = self._report(raw["report"])
        windows_raw = raw.get("windows")
        windows = self._windows(windows_raw)
        plan_ids = [w.id for w in windows]
        top_checks_raw = raw.get("checks") or LineDict(_line(raw, "checks", 1))
        top_checks = self._checks(top_checks_raw, LineDict(1), "checks", None, None)
        datasets = []
        ds_raw: LineList = raw["datasets"]
        seen: dict[str, int] = {}
        for i, d in enumerate(ds_raw):
            key = f"datasets[{i}]"
            line = _item_line(ds_raw, i, 1)
            self._unique(d["id"], seen, f"{key}.id", _line(d, "id", line), "datasets", "dataset")
            datasets.append(self._dataset(d, key, line, plan_ids, windows, top_checks_raw))
        claims = self._claims(raw.get("claims"), datasets, windows)
        site = self._site(raw.get("site"))
        run = raw.get("run") or {}
        return Spec(version=int(raw["relspan"]), report=report, datasets=tuple(datasets),
                    windows=windows, checks=top_checks, claims=claims, site=site,
                    path=self.ctx.path, text=self.text,
                    run=RunSpec(jobs=run.get("jobs"), scheduler=run.get("scheduler")))

    def _unique(self, ident: str, seen: dict[str, int], key: str, line: int, where: str,
                what: str) -> None:
        if ident in seen:
            raise self.err(
                f"{key} is '{ident}', but another {what} in {where} already has this id (line "
                f"{seen[ident]}); ids must be unique.", line=line, key=key,
                fix=f"give one of the two {what}s another id.")
        seen[ident] = line

    # -- report / site -------------------------------------------------------------------

    def _report(self, r: dict) -> ReportMeta:
        return ReportMeta(title=r["title"], summary=r.get("summary", ""),
                          authors=tuple(r.get("authors", ())), licence=r.get("licence", ""),
                          cite=r.get("cite", ""))

    def _site(self, s: dict | None) -> SiteSpec:
        s = s if s is not None else LineDict(_line(self.raw, "site", 1))
        out = s.get("out", "relspan-site")
        line = _line(s, "out", _line(self.raw, "site", 1))
        try:
            out_path = (self.ctx.folder / out).resolve()
        except (OSError, ValueError, RuntimeError) as exc:
            raise self.err(f"site.out {out!r} cannot be used as a folder path ({exc}).",
                           line=line, key="site.out",
                           fix="write a plain relative folder name such as `out: relspan-site`.") \
                from None
        folder = self.ctx.folder
        if out_path == folder or folder.is_relative_to(out_path):
            raise self.err(
                f"site.out '{out}' is the spec's own folder or a folder above it; building "
                f"the site replaces that folder, with the spec and data in it.",
                line=line, key="site.out",
                fix="write the site to a folder of its own, e.g. `out: relspan-site`.")
        return SiteSpec(out=out, out_path=out_path, figures=s.get("figures", "svg"),
                        notes=s.get("notes", ""), language=s.get("language", "en"),
                        figure_files=s.get("figure_files", "one"))

    # -- windows -------------------------------------------------------------------------

    def _windows(self, ws: LineList | None) -> tuple[WindowPlanSpec, ...]:
        if ws is None:
            return (WindowPlanSpec(id="full", kind="full"),)
        out = []
        seen: dict[str, int] = {}
        for i, w in enumerate(ws):
            key = f"windows[{i}]"
            line = _item_line(ws, i, 1)
            self._unique(w["id"], seen, f"{key}.id", _line(w, "id", line), "windows",
                         "window plan")
            kind = w["kind"]
            present = [k for k in ("width", "step", "periods") if k in w]
            if kind in ("rolling", "expanding"):
                for need in ("width", "step"):
                    if need not in w:
                        raise self.err(
                            f"{key}.{need} is missing; a {kind} plan needs width and step.",
                            line=line,
                            key=f"{key}.{need}",
                            fix=f"add `{need}:` as a number of rows (e.g. `width: 40, step: 8`)"
                                f" or in time units (e.g. `width: \"10 years\", "
                                f"step: \"2 years\"`).")
                if "periods" in w:
                    raise self.err(f"{key} is a {kind} plan, which takes no 'periods'.",
                                   line=_line(w, "periods", line), key=f"{key}.periods",
                                   fix="remove 'periods', or make it `kind: periods`.")
                width, step = _span(w["width"]), _span(w["step"])
                if (width.unit == "rows") != (step.unit == "rows"):
                    raise self.err(
                        f"{key} mixes rows and time units in width ({inline_yaml(w['width'])}) and "
                        f"step ({inline_yaml(w['step'])}).", line=_line(w, "step", line),
                        key=f"{key}.step",
                        fix="give both in rows (e.g. 40 and 8) or both in time units "
                            "(e.g. \"10 years\" and \"2 years\").")
                out.append(WindowPlanSpec(id=w["id"], kind=kind, title=w.get("title", ""),
                                          width=width, step=step))
            elif kind == "periods":
                if "periods" not in w:
                    raise self.err(
                        f"{key}.periods is missing; a periods plan lists its periods.",
                        line=line,
                        key=f"{key}.periods",
                        fix="add `periods:` with items such as `- {label: Early, from: "
                            "\"1990-01-01\", to: \"1999-12-31\"}`.")
                for k in ("width", "step"):
                    if k in w:
                        raise self.err(f"{key} is a periods plan, which takes no '{k}'.",
                                       line=_line(w, k, line), key=f"{key}.{k}",
                                       fix=f"remove '{k}', or use `kind: rolling`.")
                out.append(WindowPlanSpec(id=w["id"], kind=kind, title=w.get("title", ""),
                                          periods=self._periods(w["periods"], f"{key}.periods")))
            else:  # full
                if present:
                    k = present[0]
                    raise self.err(f"{key} is a full plan, which takes no '{k}'.",
                                   line=_line(w, k, line), key=f"{key}.{k}",
                                   fix=f"remove '{k}', or choose the kind that uses it "
                                       f"({'periods' if k == 'periods' else 'rolling'}).")
                out.append(WindowPlanSpec(id=w["id"], kind=kind, title=w.get("title", "")))
        return tuple(out)

    def _periods(self, ps: LineList, key: str) -> tuple[Period, ...]:
        out = []
        labels: dict[str, int] = {}
        for i, p in enumerate(ps):
            k = f"{key}[{i}]"
            line = _item_line(ps, i, 1)
            start, end = self._date_range(p, k, line)
            if p["label"] in labels:
                raise self.err(f"{k}.label '{p['label']}' is already used by another period of "
                               f"this plan (line {labels[p['label']]}).",
                               line=_line(p, "label", line), key=f"{k}.label",
                               fix="give each period its own label.")
            labels[p["label"]] = _line(p, "label", line)
            out.append(Period(label=p["label"], start=start, end=end))
        return tuple(out)

    def _date_range(self, m: dict, key: str, line: int) -> tuple[str | None, str | None]:
        dates = {}
        for k in ("from", "to"):
            if k in m:
                if _iso_date(m[k]) is None:
                    raise self.err(f"{key}.{k} '{m[k]}' is not a date of the calendar.",
                                   line=_line(m, k, line), key=f"{key}.{k}",
                                   fix="write an existing day as YYYY-MM-DD, e.g. "
                                       "\"1990-01-31\".")
                dates[k] = m[k]
        if "from" in dates and "to" in dates and dates["to"] < dates["from"]:
            raise self.err(f"{key}.to ({dates['to']}) is before {key}.from ({dates['from']}).",
                           line=_line(m, "to", line), key=f"{key}.to",
                           fix="swap the two dates, or correct the one that is wrong.")
        return dates.get("from"), dates.get("to")

    # -- checks --------------------------------------------------------------------------

    def _checks(self, top: dict, override: dict, key: str, columns: tuple[str, ...] | None,
                ds: dict | None) -> ChecksSpec:
        """Effective checks: ``override`` key by key over ``top`` over the defaults.

        With ``columns`` (a dataset's), also cross-checks them against the dataset.
        """
        def pick(k: str):
            if k in override:
                return override[k], f"{key}.checks.{k}", _line(override, k, override.line)
            if k in top:
                return top[k], f"checks.{k}", _line(top, k, top.line)
            return None, None, None

        defaults = ChecksSpec()
        kw: dict[str, Any] = {}
        assumptions, a_key, a_line = pick("assumptions")
        if assumptions is not None:
            kw["assumptions"] = tuple(assumptions)
        tol, _, _ = pick("tolerance")
        if tol is not None:
            kw["tolerance"] = (Tolerance(absolute=float(tol["absolute"]), relative=None)
                               if "absolute" in tol else
                               Tolerance(absolute=None, relative=float(tol["relative"])))
        norm, n_key, n_line = pick("normalise_on")
        if norm is not None:
            kw["normalise_on"] = norm
        coranks, c_key, c_line = pick("coranks")
        if coranks is not None and coranks != "auto":
            kw["coranks"] = tuple(int(c) for c in coranks)
        for k, conv in (("max_angle_deg", float), ("frisch_starts", int), ("seed", int)):
            v, _, _ = pick(k)
            if v is not None:
                kw[k] = conv(v)
        kw["resampling"] = _resampling(top.get("resampling") or {}, override.get("resampling") or {})
        if columns is None:
            return ChecksSpec(**kw)
        # dataset-level consequences
        ds_name = f"{key} ('{ds['id']}')"
        has_shares = all("noise_share" in v for v in ds["variables"])
        if assumptions is None:
            if not has_shares:
                kw["assumptions"] = tuple(a for a in defaults.assumptions if a != "shaped")
        elif "shaped" in assumptions and not has_shares:
            raise self.err(
                f"{a_key} lists 'shaped', but the variables of {ds_name} have no "
                f"noise_share; the shaped assumption needs the relative noise variance of "
                f"every variable.", line=a_line, key=a_key,
                fix=f"add `noise_share:` to every variable of {key}, or leave 'shaped' out "
                    f"(in {key}.checks.assumptions if the other datasets need it).")
        vs = ds["variables"]
        zero = [i for i, v in enumerate(vs) if has_shares and v.get("noise_share") == 0]
        if zero and "shaped" in kw.get("assumptions", defaults.assumptions):
            i = zero[0]
            raise self.err(
                f"{key}.variables[{i}].noise_share is 0, but the shaped assumption of {ds_name} "
                f"needs every noise share > 0 (its noise variances up to one common factor).",
                line=_line(vs[i], "noise_share", _item_line(vs, i, getattr(ds, "line", 1))),
                key=f"{key}.variables[{i}].noise_share",
                fix="give that variable a small positive share (e.g. a hundredth of the others), "
                    f"or leave 'shaped' out (in {key}.checks.assumptions).")
        if norm is not None and norm != "auto" and norm not in columns:
            raise self.err(
                f"{n_key} is '{norm}', which is not a variable of {ds_name}. Its variables "
                f"are: {', '.join(columns)}.{_nearest(norm, columns)}", line=n_line, key=n_key,
                fix=f"use `normalise_on: auto` or one of {', '.join(columns)}"
                    f"{' (set it in ' + key + '.checks to differ per dataset)' if n_key.startswith('checks') else ''}.")
        if coranks not in (None, "auto"):
            for c in coranks:
                if c >= len(columns):
                    raise self.err(
                        f"{c_key} asks for corank {c}, but {ds_name} has {len(columns)} "
                        f"variables, so at most {_relations(len(columns) - 1)} can hold.",
                        line=c_line, key=c_key,
                        fix=f"list coranks below {len(columns)}, or `coranks: auto`.")
        return ChecksSpec(**kw)

    # -- datasets ------------------------------------------------------------------------

    def _dataset(self, d: dict, key: str, line: int, plan_ids: list[str],
                 windows: tuple[WindowPlanSpec, ...], top_checks_raw: dict) -> DatasetSpec:
        variables = self._variables(d["variables"], f"{key}.variables", line)
        columns = tuple(v.column for v in variables)
        time = None
        if "time" in d:
            t = d["time"]
            tline = _line(d, "time", line)
            start, end = self._date_range(t, f"{key}.time", tline)
            time = TimeSpec(column=t["column"], format=t.get("format", "auto"), start=start,
                            end=end)
            if "%" in time.format:
                from relspan.data.timeindex import pattern_problem

                why = pattern_problem(time.format)
                if why is not None:
                    raise self.err(
                        f"{key}.time.format {time.format!r} cannot be used: {why}.",
                        line=_line(t, "format", tline), key=f"{key}.time.format",
                        fix="use a pattern of %Y, %m, %d, %H, %M, %S (e.g. '%d/%m/%Y'), or one of "
                            "auto, year, quarter, month, date, datetime.")
            if t["column"] in columns:
                raise self.err(
                    f"{key}.time.column '{t['column']}' is also listed as a variable; the time "
                    f"column dates the rows and cannot be analysed as a measurement.",
                    line=_line(t, "column", tline), key=f"{key}.time.column",
                    fix="remove it from the variables, or name another time column.")
        plans = tuple(d.get("plans", ()))
        known_ids, listed = set(plan_ids), set(plans)
        for i, p in enumerate(plans):
            if p not in known_ids:
                pl = _item_line(d["plans"], i, _line(d, "plans", line))
                raise self.err(
                    f"{key}.plans[{i}] is '{p}', which is not the id of a window plan. Plans "
                    f"defined under windows: {', '.join(plan_ids)}.{_nearest(p, plan_ids)}",
                    line=pl, key=f"{key}.plans[{i}]",
                    fix="use one of the plan ids above, or add a plan with this id under "
                        "`windows:`.")
        used = [w for w in windows if not plans or w.id in listed]
        if time is None:
            position = {id(w): i for i, w in enumerate(windows)}
            for w in used:
                wi = position[id(w)]
                needs = None
                if w.kind == "periods":
                    needs = "is a periods plan"
                elif w.width is not None and w.width.unit != "rows":
                    needs = f"counts its width in {w.width.unit}"
                if needs:
                    where = (_item_line(d["plans"], plans.index(w.id), line) if plans else line)
                    raise self.err(
                        f"{key} ('{d['id']}') has no time column, but window plan '{w.id}' "
                        f"(windows[{wi}]) {needs}, which needs dates.", line=where,
                        key=f"{key}.plans" if plans else key,
                        fix=f"add `time: {{column: ...}}` to {key}, give the plan's width and "
                            f"step in rows, or list only other plans in {key}.plans.")
        checks = self._checks(top_checks_raw, d.get("checks") or LineDict(line), key, columns, d)
        source, source_path = self._source(d, key, line)
        encoding = d.get("encoding", "auto")
        if encoding != "auto":
            import codecs

            try:
                codecs.lookup(encoding)
            except LookupError:
                raise self.err(f"{key}.encoding is {encoding!r}, which is not an encoding Python "
                               "knows.", line=_line(d, "encoding", line), key=f"{key}.encoding",
                               fix="use a name such as utf-8, utf-16, cp1252 or latin-1, or auto."
                               ) from None
        separator = d.get("separator", "auto")
        decimal = d.get("decimal", "auto")
        if separator != "auto" and separator == decimal:
            raise self.err(f"{key}.separator and {key}.decimal are both {separator!r}.",
                           line=_line(d, "decimal", line), key=f"{key}.decimal",
                           fix="a comma-separated file uses '.' as its decimal mark; set one of them "
                               "to another character, or to auto.")
        return DatasetSpec(id=d["id"], title=d.get("title", d["id"]), source=source,
                           source_path=source_path, variables=variables,
                           format=d.get("format", "auto"), description=d.get("description", ""),
                           time=time, missing=d.get("missing", "drop"), plans=plans,
                           checks=checks, separator=separator, decimal=decimal, encoding=encoding,
                           sheet=d.get("sheet"))

    def _variables(self, vs: LineList, key: str, line: int) -> tuple[VariableSpec, ...]:
        out = []
        seen: dict[str, int] = {}
        for i, v in enumerate(vs):
            k = f"{key}[{i}]"
            vline = _item_line(vs, i, line)
            col = v["column"]
            cline = _line(v, "column", vline)
            label = v.get("label", col)
            if not str(label).strip():
                given = "label" in v
                raise self.err(
                    f"{k}.{'label' if given else 'column'} is {label!r}, so the variable would have "
                    "no visible name on the site" + ("" if given else " (the label defaults to the "
                                                     "column name)") + ".",
                    line=_line(v, "label", vline) if given else cline,
                    key=f"{k}.{'label' if given else 'column'}",
                    fix=(f"give {k} a `label:` with words in it"
                         + ("" if given else ", or rename the column in the file's header") + "."))
            if col in seen:
                raise self.err(
                    f"{k}.column '{col}' is listed twice in this dataset (lines {seen[col]} and "
                    f"{cline}).", line=cline, key=f"{k}.column",
                    fix="list each column once; to analyse a column two ways, make a second "
                        "dataset.")
            seen[col] = cline
            share = v.get("noise_share")
            out.append(VariableSpec(column=col, label=v.get("label", col), unit=v.get("unit", ""),
                                    transform=v.get("transform", "none"),
                                    noise_share=None if share is None else float(share)))
        with_share = [i for i, v in enumerate(vs) if "noise_share" in v]
        if with_share and len(with_share) != len(vs):
            missing = next(i for i in range(len(vs)) if i not in with_share)
            raise self.err(
                f"{key}[{with_share[0]}] has a noise_share but {key}[{missing}] has none; give "
                f"noise_share on every variable of the dataset or on none.",
                line=_item_line(vs, missing, line), key=f"{key}[{missing}].noise_share",
                fix=f"add `noise_share:` to {key}[{missing}] (and any other variable without "
                    f"one), or remove it everywhere.")
        if with_share and all(v.noise_share == 0 for v in out):
            raise self.err(
                f"every noise_share in {key} is 0; only their ratios matter, so at least one "
                f"must be > 0.", line=_item_line(vs, 0, line), key=f"{key}[0].noise_share",
                fix="give the relative noise variances, e.g. 1 for each variable.")
        return tuple(out)

    def _source(self, d: dict, key: str, line: int) -> tuple[str, Path]:
        source = d["source"]
        k = f"{key}.source"
        sline = _line(d, "source", line)
        try:
            p = Path(source).expanduser()
            resolved = (self.ctx.folder / p).resolve()
            inside = resolved.is_relative_to(self.ctx.folder)
            exists = resolved.exists()
            is_dir = resolved.is_dir()
        except (OSError, ValueError, RuntimeError) as exc:
            raise self.err(f"{k} {source!r} cannot be used as a file path ({exc}).",
                           line=sline, key=k,
                           fix="write the path of the data file relative to the spec's "
                               "folder, e.g. `source: data/harbour.csv`.") from None
        if not inside and not d.get("allow_outside", False):
            raise self.err(
                f"{k} '{source}' lies outside the spec's folder; a spec whose data live "
                f"elsewhere cannot be rebuilt from its folder alone.", line=sline, key=k,
                fix=f"copy the file into the spec's folder (or a folder below it), or add "
                    f"`allow_outside: true` to {key}.")
        if not exists:
            raise self.err(
                f"{k}: data file '{source}' not found (looked for {resolved.name!r} in "
                f"{_rel_folder(resolved.parent, self.ctx.folder)}).", line=sline, key=k,
                fix="check the spelling; the path is relative to the folder of the spec, not "
                    "to the current folder.")
        if is_dir:
            raise self.err(f"{k} '{source}' is a folder; a data file is expected.", line=sline,
                           key=k, fix="name the CSV, TSV or Parquet file inside it.")
        return source, resolved

    # -- claims --------------------------------------------------------------------------

    def _claims(self, cs: LineList | None, datasets: list[DatasetSpec],
                windows: tuple[WindowPlanSpec, ...]) -> tuple[ClaimSpec, ...]:
        if not cs:
            return ()
        by_id = {d.id: d for d in datasets}
        out = []
        seen: dict[str, int] = {}
        for i, c in enumerate(cs):
            key = f"claims[{i}]"
            line = _item_line(cs, i, 1)
            L = lambda k: _line(c, k, line)  # noqa: E731
            self._unique(c["id"], seen, f"{key}.id", L("id"), "claims", "claim")
            kind = c["kind"]
            allowed = set(_CLAIM_COMMON) | set(_CLAIM_FIELDS[kind])
            if kind == "no_break":
                allowed.discard("plan")  # the scan covers the whole sample
            for k in c:
                if k not in allowed:
                    uses = ", ".join(_CLAIM_FIELDS[kind])
                    raise self.err(
                        f"{key}.{k} does not apply to a {kind} claim, which uses: {uses}.",
                        line=L(k), key=f"{key}.{k}",
                        fix=f"remove '{k}', or change `kind:` to the kind that uses it.")
            ds = by_id.get(c["dataset"])
            if ds is None:
                raise self.err(
                    f"{key}.dataset is '{c['dataset']}', which is not the id of a dataset. "
                    f"Datasets: {', '.join(by_id)}.{_nearest(c['dataset'], by_id)}",
                    line=L("dataset"), key=f"{key}.dataset",
                    fix="use the id of one of the datasets above.")
            plan_ids = [w.id for w in windows]
            usable = [p for p in (ds.plans or plan_ids)]
            if kind != "no_break" and "plan" not in c:
                raise self.err(
                    f"{key}.plan is missing; a {kind} claim is checked in the windows of a plan.",
                    line=line, key=f"{key}.plan",
                    fix=f"add `plan:` with one of {', '.join(usable)}.")
            if kind == "no_break":
                pass
            elif c["plan"] not in plan_ids:
                raise self.err(
                    f"{key}.plan is '{c['plan']}', which is not the id of a window plan. Plans: "
                    f"{', '.join(plan_ids)}.{_nearest(c['plan'], plan_ids)}",
                    line=L("plan"), key=f"{key}.plan",
                    fix="use the id of one of the plans under `windows:`.")
            elif c["plan"] not in usable:
                raise self.err(
                    f"{key}.plan is '{c['plan']}', but dataset '{ds.id}' does not use that plan "
                    f"(its plans: {', '.join(usable)}).", line=L("plan"), key=f"{key}.plan",
                    fix=f"use one of {', '.join(usable)}, or add '{c['plan']}' to the "
                        f"dataset's `plans:`.")
            assumption = c.get("assumption", _CLAIM_DEFAULT_ASSUMPTION[kind])
            if assumption is None:
                raise self.err(f"{key}.assumption is missing; a {kind} claim must name the "
                               f"assumption it is made under.", line=line,
                               key=f"{key}.assumption",
                               fix=f"add `assumption:` with one of "
                                   f"{', '.join(ds.checks.assumptions)}.")
            if kind == "coefficient_bounded" and assumption != "diagonal":
                raise self.err(
                    f"{key}.assumption is '{assumption}', but a coefficient_bounded claim is "
                    f"about the diagonal-noise (Frisch scheme) interval.",
                    line=L("assumption"), key=f"{key}.assumption",
                    fix="remove `assumption:` or write `assumption: diagonal`.")
            if assumption not in ds.checks.assumptions:
                stated = "assumption" in c
                raise self.err(
                    f"{key} is made under the {assumption} assumption"
                    f"{'' if stated else ' (the default for a ' + kind + ' claim)'}, which is "
                    f"not analysed for dataset '{ds.id}' (its assumptions: "
                    f"{', '.join(ds.checks.assumptions)}).",
                    line=L("assumption") if stated else line, key=f"{key}.assumption",
                    fix=f"add '{assumption}' to the dataset's checks.assumptions, or claim "
                        f"under one of those listed.")
            n = len(ds.variables)
            below = c.get("below_deg")
            if kind == "corank":
                bounds = [k for k in ("equals", "at_least", "at_most") if k in c]
                if not bounds:
                    raise self.err(
                        f"{key} is a corank claim but gives none of equals, at_least, at_most.",
                        line=line, key=key,
                        fix="add `equals: 2` (or `at_least:` / `at_most:`) to state the "
                            "corank claimed.")
                if "equals" in c and len(bounds) > 1:
                    raise self.err(
                        f"{key} gives equals together with {' and '.join(bounds[1:])}.",
                        line=L(bounds[1]), key=f"{key}.{bounds[1]}",
                        fix="give either equals, or at_least and/or at_most.")
                if "at_least" in c and "at_most" in c and c["at_least"] > c["at_most"]:
                    raise self.err(
                        f"{key}.at_least ({c['at_least']}) is above {key}.at_most "
                        f"({c['at_most']}).", line=L("at_most"), key=f"{key}.at_most",
                        fix="swap the two numbers, or correct the one that is wrong.")
                for k in bounds:
                    if c[k] >= n:
                        raise self.err(
                            f"{key}.{k} is {c[k]}, but dataset '{ds.id}' has {n} variables, so "
                            f"at most {_relations(n - 1)} can hold.", line=L(k), key=f"{key}.{k}",
                            fix=f"claim a corank below {n}.")
            if kind == "subspace_stable":
                if "corank" not in c:
                    raise self.err(
                        f"{key}.corank is missing; a subspace_stable claim compares the "
                        f"subspace of that many relations.", line=line, key=f"{key}.corank",
                        fix="add `corank:` with the number of relations whose subspace is "
                            "compared.")
                if c["corank"] >= n:
                    raise self.err(
                        f"{key}.corank is {c['corank']}, but dataset '{ds.id}' has {n} "
                        f"variables, so at most {_relations(n - 1)} can hold.",
                        line=L("corank"), key=f"{key}.corank",
                        fix=f"use a corank below {n}.")
                if below is None:
                    below = ds.checks.max_angle_deg
            if kind in ("sign_stable", "coefficient_bounded"):
                for k in ("normalise_on", "variable"):
                    if k not in c:
                        raise self.err(
                            f"{key}.{k} is missing; a {kind} claim needs it.", line=line,
                            key=f"{key}.{k}",
                            fix=f"add `{k}:` with one of {', '.join(ds.columns)}.")
                    if c[k] not in ds.columns:
                        raise self.err(
                            f"{key}.{k} is '{c[k]}', which is not a variable of dataset "
                            f"'{ds.id}' (its variables: {', '.join(ds.columns)})."
                            f"{_nearest(c[k], ds.columns)}", line=L(k), key=f"{key}.{k}",
                            fix=f"use one of {', '.join(ds.columns)}.")
                if c["variable"] == c["normalise_on"]:
                    raise self.err(
                        f"{key}.variable and {key}.normalise_on are both '{c['variable']}'; the "
                        f"coefficient of the normalising variable is 1 by definition.",
                        line=L("variable"), key=f"{key}.variable",
                        fix="name another variable to examine.")
            out.append(ClaimSpec(
                id=c["id"], kind=kind, dataset=c["dataset"], plan=c.get("plan", ""),
                text=c.get("text", ""), assumption=assumption,
                corank=None if "corank" not in c else int(c["corank"]),
                equals=None if "equals" not in c else int(c["equals"]),
                at_least=None if "at_least" not in c else int(c["at_least"]),
                at_most=None if "at_most" not in c else int(c["at_most"]),
                below_deg=None if below is None else float(below),
                normalise_on=c.get("normalise_on"), variable=c.get("variable"),
                sign=c.get("sign"), line=line))
        return tuple(out)


def _rel_folder(folder: Path, base: Path) -> str:
    try:
        rel = folder.relative_to(base)
    except ValueError:
        return str(folder)
    return "the spec's folder" if str(rel) == "." else f"'{rel.as_posix()}' under the spec's folder"


def _relations(q: int) -> str:
    return f"{q} relation{'s' if q != 1 else ''}"


def _resampling(top: dict, override: dict) -> ResamplingSpec:
    """``checks.resampling``: a dataset's keys over the top level's over the defaults (key by key)."""
    kw: dict[str, Any] = {}
    for k, conv in (("resamples", int), ("level", float), ("scheme", str), ("seed", int),
                    ("diagonal_resamples", int)):
        v = override[k] if k in override else top.get(k)
        if v is not None:
            kw[k] = conv(v)
    b = override["block_length"] if "block_length" in override else top.get("block_length")
    if b is not None:
        kw["block_length"] = "auto" if b == "auto" else float(b)
    return ResamplingSpec(**kw)
