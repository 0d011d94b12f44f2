"""``relspan verify SITE``: re-run a published site's analysis and say whether it replicates.

What is checked, in order:

1. **Inputs.** The spec (the file the site names, found beside the current
   folder or given with ``--spec``) against the copy the site publishes, and
   every data file's SHA-256 against the checksum in ``data/results.json``.
2. **Numbers.** The analysis is re-run from the spec and data (no cache), and
   every number of ``data/results.json``, of each ``data/<id>/results.json`` and
   of the CSV downloads (``assumptions.csv``, ``windows.csv``) is compared with
   the rebuilt value: *identical* (same digits), *within precision* (differs by
   at most one unit in the last published digit, :mod:`relspan.precision`) or
   *different*. Text (findings, labels, observed values) must be identical.
3. **Claims.** Every claim verdict (holds / fails) must be the same.

The environment (versions) is compared and reported, never counted as a
difference: a replication on another machine is expected to differ there.

Exit codes (``relspan verify``): 0 everything agrees, 1 something differs (named),
2 bad input (a folder that is not a relspan site, a spec that cannot be found).
"""

from __future__ import annotations

import csv
import hashlib
import io
import json
import math
from dataclasses import dataclass, field
from pathlib import Path

from relspan.errors import OptionsError

__all__ = ["verify", "Replication", "Comparison", "compare_documents", "compare_csv"]

IDENTICAL, WITHIN, DIFFERENT = "identical", "within precision", "different"


@dataclass
class Comparison:
    """Counts of one compared file or dataset, with the first differences named."""

    identical: int = 0
    within: int = 0
    different: int = 0
    examples: list = field(default_factory=list)

    def add(self, outcome: str, where: str = "", detail: str = "") -> None:
        if outcome == IDENTICAL:
            self.identical += 1
        elif outcome == WITHIN:
            self.within += 1
        else:
            self.different += 1
            if len(self.examples) < 5:
                self.examples.append(f"{where}: {detail}")

    @property
    def word(self) -> str:
        return DIFFERENT if self.different else (WITHIN if self.within else IDENTICAL)

    def merge(self, other: "Comparison") -> None:
        self.identical += other.identical
        self.within += other.within
        self.different += other.different
        self.examples.extend(other.examples[: max(0, 5 - len(self.examples))])


@dataclass
class Replication:
    """The outcome of :func:`verify`: one row per input, dataset and claim, and a verdict."""

    site: Path
    spec: Path
    inputs: list = field(default_factory=list)      # (file, outcome, detail)
    datasets: dict = field(default_factory=dict)    # id -> Comparison
    claims: list = field(default_factory=list)      # (id, outcome, detail)
    environment: list = field(default_factory=list)  # differences in words (information only)

    @property
    def agrees(self) -> bool:
        return (all(o != DIFFERENT for _, o, _ in self.inputs)
                and all(c.different == 0 for c in self.datasets.values())
                and all(o != DIFFERENT for _, o, _ in self.claims))

    def differences(self) -> list[str]:
        out = [f"input {f} {detail}" for f, o, detail in self.inputs if o == DIFFERENT]
        for ds, c in self.datasets.items():
            if c.different:
                out.append(f"dataset {ds}: {c.different} value(s) beyond precision (first: {c.examples[0]})")
        out += [f"claim {cid}: {detail}" for cid, o, detail in self.claims if o == DIFFERENT]
        return out

    def verdict(self) -> str:
        if self.agrees:
            within = any(c.within for c in self.datasets.values())
            how = ("every number within its stated precision" if within else "every number identical")
            return (f"verdict: REPLICATED: every input identical, {how}, every claim verdict the same "
                    f"({len(self.claims)} claim(s)).")
        diffs = self.differences()
        return (f"verdict: DIFFERENT: {len(diffs)} difference(s): " + "; ".join(diffs[:3])
                + ("; ..." if len(diffs) > 3 else "") + ".")

    def report(self) -> str:
        lines = [f"replication of {self.site} from {self.spec}", "", "inputs (SHA-256):"]
        w = max([len(f) for f, _, _ in self.inputs] + [8])
        lines += [f"  {f.ljust(w)}  {o}{(': ' + d) if d else ''}" for f, o, d in self.inputs]
        lines += ["", "datasets (published numbers compared with the rebuild):",
                  f"  {'dataset'.ljust(w)}  {'identical':>9}  {'within precision':>16}  {'different':>9}  result"]
        for ds, c in self.datasets.items():
            lines.append(f"  {ds.ljust(w)}  {c.identical:>9}  {c.within:>16}  {c.different:>9}  {c.word}")
            lines += [f"      {e}" for e in c.examples]
        lines += ["", "claims (verdicts):"]
        wc = max([len(c) for c, _, _ in self.claims] + [5])
        lines += [f"  {c.ljust(wc)}  {o}: {d}" for c, o, d in self.claims] or ["  none in the spec"]
        lines += ["", "environment: " + ("the same as the published one" if not self.environment else
                                          "differs from the published one (information, not a failure): "
                                          + "; ".join(self.environment[:6])
                                          + ("; ..." if len(self.environment) > 6 else "")),
                  "", self.verdict()]
        return "\n".join(lines)


def _sha256(path: Path) -> str:
    h = hashlib.sha256()
    with open(path, "rb") as fh:
        for block in iter(lambda: fh.read(1 << 20), b""):
            h.update(block)
    return h.hexdigest()


def _read_json(path: Path, site: Path) -> dict:
    try:
        return json.loads(path.read_text(encoding="utf-8"))
    except FileNotFoundError:
        raise OptionsError(
            f"{site} is not a site written by `relspan build`: {path.relative_to(site)} is missing.",
            path=str(site), key="SITE",
            fix="give the folder of a published relspan site (it holds data/results.json).") from None
    except (OSError, UnicodeDecodeError, ValueError) as err:
        raise OptionsError(f"cannot read {path} as JSON ({err}).", path=str(path), key="SITE",
                           fix="restore the published file (its checksum is in the site's SHA256SUMS).") from None


def _published_spec(site: Path) -> Path:
    """The spec copy a site publishes in data/ (the one YAML file there)."""
    found = sorted(p for p in (site / "data").glob("*.y*ml") if p.is_file()) if (site / "data").is_dir() else []
    if len(found) != 1:
        raise OptionsError(
            f"{site} does not hold exactly one published spec in data/ (found {len(found)}).",
            path=str(site), key="SITE", fix="give the folder of a published relspan site, or pass --spec SPEC.")
    return found[0]


def _find_spec(site: Path, published: Path) -> Path:
    """The spec the site names: a file of the published name, in this folder or one folder below,
    preferring one with the published bytes."""
    here = Path.cwd()
    candidates = [here / published.name] + sorted(here.glob(f"*/{published.name}"))
    candidates = [c for c in candidates if c.is_file()]
    want = _sha256(published)
    for c in candidates:
        if _sha256(c) == want:
            return c
    if candidates:
        return candidates[0]
    raise OptionsError(
        f"cannot find the spec {published.name} that {site} was built from: it is neither in the "
        f"current folder nor one folder below.", path=str(site), key="--spec",
        fix=f"run relspan verify from the folder that holds {published.name}, or pass --spec PATH.")


def _quantum(scale: float, digits: int) -> float:
    from relspan.precision import quantum

    return quantum(scale, digits)


def _is_num(v) -> bool:
    return isinstance(v, (int, float)) and not isinstance(v, bool)


def _flat(v):
    if isinstance(v, list):
        for x in v:
            yield from _flat(x)
    elif isinstance(v, float) and math.isfinite(v):
        yield v


def compare_documents(published, rebuilt, *, path: tuple = (), result: Comparison | None = None,
                      context=None, scale: float | None = None) -> Comparison:
    """Compare two results documents value by value (numbers within precision, text exactly)."""
    from relspan.precision import precision_for, reference_scale

    out = result if result is not None else Comparison()
    where = "/".join(path) or "(top)"
    if isinstance(published, dict) and isinstance(rebuilt, dict):
        for k in sorted(set(published) | set(rebuilt)):
            if k not in rebuilt:
                out.add(DIFFERENT, f"{where}/{k}", "published, not in the rebuild")
            elif k not in published:
                out.add(DIFFERENT, f"{where}/{k}", "in the rebuild, not published")
            else:
                compare_documents(published[k], rebuilt[k], path=path + (str(k),), result=out,
                                  context=published)
        return out
    if isinstance(published, list) and isinstance(rebuilt, list):
        if len(published) != len(rebuilt):
            out.add(DIFFERENT, where, f"{len(published)} published entries, {len(rebuilt)} rebuilt")
            return out
        if scale is None and any(isinstance(v, float) for v in _flat(published)):
            scale = max((abs(v) for v in _flat(published)), default=0.0)
        for i, (a, b) in enumerate(zip(published, rebuilt)):
            compare_documents(a, b, path=path + (str(i),), result=out, context=context, scale=scale)
        return out
    if _is_num(published) and _is_num(rebuilt):
        if published == rebuilt:
            out.add(IDENTICAL)
            return out
        if isinstance(published, int) and isinstance(rebuilt, int):
            out.add(DIFFERENT, where, f"published {published}, rebuilt {rebuilt}")
            return out
        digits = precision_for([p for p in path if not p.isdigit()],
                               context if isinstance(context, dict) else None).digits
        s = scale if scale else max(abs(float(published)), abs(float(rebuilt)))
        ref = reference_scale(path[-1] if path else "", context)
        if ref is not None and ref > s:
            s = ref
        if abs(float(published) - float(rebuilt)) <= _quantum(s, digits) * 1.000001:
            out.add(WITHIN)
        else:
            out.add(DIFFERENT, where, f"published {published!r}, rebuilt {rebuilt!r} "
                                      f"(precision: {digits} significant digits)")
        return out
    if published == rebuilt:
        out.add(IDENTICAL)
    else:
        out.add(DIFFERENT, where, f"published {_short(published)}, rebuilt {_short(rebuilt)}")
    return out


def _short(v) -> str:
    text = json.dumps(v, ensure_ascii=False) if not isinstance(v, str) else repr(v)
    return text if len(text) <= 80 else text[:77] + "..."


def _cell(text: str):
    try:
        v = float(text)
    except ValueError:
        return text
    return v if math.isfinite(v) else text


def compare_csv(published: bytes, rebuilt: bytes, *, name: str, result: Comparison | None = None) -> Comparison:
    """Compare two CSV downloads cell by cell (numbers within the column's precision)."""
    from relspan.precision import canonical_frame  # noqa: F401 - the same rule decides digits
    from relspan.precision import precision_for

    out = result if result is not None else Comparison()
    a = list(csv.reader(io.StringIO(published.decode("utf-8"))))
    b = list(csv.reader(io.StringIO(rebuilt.decode("utf-8"))))
    if not a or not b or a[0] != b[0] or len(a) != len(b):
        out.add(DIFFERENT, name, "the table's columns or rows differ")
        return out
    header = a[0]
    assumption_col = header.index("assumption") if "assumption" in header else None
    scales = {}
    for j in range(len(header)):
        vals = [abs(v) for r in a[1:] if j < len(r) and isinstance(v := _cell(r[j]), float)]
        scales[j] = max(vals, default=0.0)
    for i, (ra, rb) in enumerate(zip(a[1:], b[1:]), start=2):
        if len(ra) != len(rb):
            out.add(DIFFERENT, f"{name} line {i}", "a different number of fields")
            continue
        ctx = {"assumption": ra[assumption_col]} if assumption_col is not None else None
        for j, (x, y) in enumerate(zip(ra, rb)):
            if x == y:
                out.add(IDENTICAL)
                continue
            u, v = _cell(x), _cell(y)
            if isinstance(u, float) and isinstance(v, float):
                digits = precision_for((header[j],), ctx).digits
                if abs(u - v) <= _quantum(scales[j] or max(abs(u), abs(v)), digits) * 1.000001:
                    out.add(WITHIN)
                    continue
            out.add(DIFFERENT, f"{name} line {i}, column {header[j]}", f"published {x!r}, rebuilt {y!r}")
    return out


def _environment_differences(published: dict, rebuilt: dict) -> list[str]:
    out = []
    if not isinstance(published, dict):
        return ["the published environment is not readable"]
    pd_, rd = published.get("distributions"), rebuilt.get("distributions", {})
    for k in ("python", "os", "architecture", "relspan"):
        if k in published and published.get(k) != rebuilt.get(k):
            out.append(f"{k} {published.get(k, '?')} (here {rebuilt.get(k)})")
    if isinstance(pd_, dict):
        for k in sorted(set(pd_) | set(rd)):
            if pd_.get(k) != rd.get(k):
                out.append(f"{k} {pd_.get(k, 'absent')} (here {rd.get(k, 'absent')})")
    else:  # an older layout: name -> version
        for k, v in sorted(published.items()):
            here = rd.get(k.lower(), rebuilt.get(k))
            if isinstance(v, str) and here is not None and here != v:
                out.append(f"{k} {v} (here {here})")
    if published.get("blas") is not None and published.get("blas") != rebuilt.get("blas"):
        out.append("maths library " + ", ".join(f"{b.get('library')} {b.get('version')}"
                                                 for b in published.get("blas") or []))
    return out


def verify(site, *, spec=None, jobs: int | None = 1, progress: bool | None = False,
           run=None) -> Replication:
    """Re-run the analysis a published site names and compare everything it published.

    Parameters
    ----------
    site : str or Path
        The folder of a site written by ``relspan build``.
    spec : str or Path, optional
        The spec to re-run. Default: the file of the published spec's name in
        the current folder (or one folder below), preferring the one whose
        bytes equal the published copy.
    jobs : int, optional
        Worker processes for the re-run (1: in this process).
    run : AnalysisRun, optional
        An analysis already re-run from ``spec`` (skips the re-run; for tests
        and notebooks that have one).

    Returns
    -------
    Replication
        ``.agrees``, ``.report()`` (the text ``relspan verify`` prints) and
        ``.verdict()``.
    """
    from relspan.report.site_content import _assumptions_csv, _windows_csv, results_document
    from relspan.spec import load_spec

    site = Path(site)
    if not site.is_dir():
        raise OptionsError(f"{site} is not a folder.", path=str(site), key="SITE",
                           fix="give the folder of a published relspan site (it holds data/results.json).")
    published = _read_json(site / "data" / "results.json", site)
    published_spec = _published_spec(site)
    spec_path = Path(spec) if spec is not None else _find_spec(site, published_spec)
    if not spec_path.is_file():
        raise OptionsError(f"the spec {spec_path} does not exist.", path=str(spec_path), key="--spec",
                           fix="give the path of the spec the site was built from.")
    rep = Replication(site=site, spec=spec_path)
    same_spec = spec_path.read_bytes() == published_spec.read_bytes()
    rep.inputs.append((str(spec_path), IDENTICAL if same_spec else DIFFERENT,
                       "" if same_spec else f"differs from the published copy data/{published_spec.name}"))
    loaded = load_spec(spec_path)
    if run is None:
        from relspan.run.pipeline import run_analysis

        run = run_analysis(loaded, jobs=jobs, use_cache=False, progress=progress)
    rebuilt = results_document(run)

    pub_ds = {d.get("id"): d for d in published.get("datasets", []) if isinstance(d, dict)}
    for ds_spec, result in zip(loaded.datasets, run.datasets):
        want = pub_ds.get(ds_spec.id, {}).get("source_sha256")
        got = result.prepared.sha256
        shown = str(ds_spec.source_path) if hasattr(ds_spec, "source_path") else ds_spec.source
        if want is None:
            rep.inputs.append((shown, DIFFERENT, f"dataset {ds_spec.id} is not in the published results"))
        elif want == got:
            rep.inputs.append((shown, IDENTICAL, ""))
        else:
            rep.inputs.append((shown, DIFFERENT, f"SHA-256 {got[:16]}... is not the published {want[:16]}..."))
    for missing in sorted(set(pub_ds) - {d.spec.id for d in run.datasets}):
        rep.inputs.append((f"dataset {missing}", DIFFERENT, "published, but not in the spec"))

    reb_ds = {d["id"]: d for d in rebuilt["datasets"]}
    results = {r.spec.id: r for r in run.datasets}
    for ds_id in list(dict.fromkeys(list(pub_ds) + list(reb_ds))):
        comp = Comparison()
        if ds_id not in reb_ds or ds_id not in pub_ds:
            comp.add(DIFFERENT, ds_id, "in only one of the published site and the rebuild")
            rep.datasets[ds_id] = comp
            continue
        compare_documents(pub_ds[ds_id], reb_ds[ds_id], path=("datasets", ds_id), result=comp)
        own = site / "data" / ds_id / "results.json"
        if own.is_file():
            compare_documents(_read_json(own, site), reb_ds[ds_id], path=(f"data/{ds_id}/results.json",),
                              result=comp)
        else:
            comp.add(DIFFERENT, f"data/{ds_id}/results.json", "missing from the site")
        for name, make in (("assumptions.csv", _assumptions_csv), ("windows.csv", _windows_csv)):
            f = site / "data" / ds_id / name
            if f.is_file():
                compare_csv(f.read_bytes(), make(results[ds_id]), name=f"data/{ds_id}/{name}", result=comp)
            else:
                comp.add(DIFFERENT, f"data/{ds_id}/{name}", "missing from the site")
        rep.datasets[ds_id] = comp

    pub_claims = {c.get("id"): c for c in published.get("claims", []) if isinstance(c, dict)}
    for claim in rebuilt["claims"]:
        cid = claim.get("id")
        old = pub_claims.pop(cid, None)
        now = "holds" if claim.get("holds") else "fails"
        if old is None:
            rep.claims.append((cid, DIFFERENT, f"not in the published site (rebuilt: {now})"))
            continue
        before = "holds" if old.get("holds") else "fails"
        if before != now:
            rep.claims.append((cid, DIFFERENT, f"published verdict {before}, rebuilt {now}"))
            continue
        comp = compare_documents(old, claim, path=("claims", str(cid)))
        if comp.different:
            rep.claims.append((cid, DIFFERENT, f"verdict {now} in both, but {comp.examples[0]}"))
        else:
            rep.claims.append((cid, comp.word, now))
    for cid in pub_claims:
        rep.claims.append((cid, DIFFERENT, "published, but not in the spec"))
    rep.environment = _environment_differences(published.get("environment", {}), rebuilt["environment"])
    return rep
