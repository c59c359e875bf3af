"""Benchmark suites: a stratified pick from a library, written with a checksum manifest.

A suite folder holds::

    instances/NN-<id>.json   the instances (and any other export formats asked for)
    table.csv                one row per instance: size, optimum, every hardness figure
    summary.txt              a few lines a person can read
    manifest.json            what was picked and how, with the SHA-256 of every file
    sha256sums.txt           the same checksums in the format ``sha256sum -c`` reads

The pick: entries are split into size groups (each distinct n, or up to
``size_groups`` groups of neighbouring sizes), the count is shared out as
evenly as the groups allow, and inside each group the entries are ordered by
the hardness metric and taken at evenly spaced quantiles (the middle of each
of k equal slices), so every suite spans easy to hard at every size.  The
pick is deterministic: the same library and options give the same suite.
"""

from __future__ import annotations

import csv
import dataclasses
import hashlib
import io as _io
import json
from collections import Counter
from pathlib import Path

from .. import __version__
from ..errors import FormatError, InputError
from ..export import FORMATS, check_export, export_instance
from ..io import atomic_write, load_instance
from . import schema
from .entry import Entry, energy_tolerance, json_safe, known
from .fingerprint import fingerprint
from .store import Library, VerifyReport

SUITE_FORMAT = "instgen-suite"
SUITE_VERSION = 1
MANIFEST, SUMS, TABLE, SUMMARY, INSTANCES = "manifest.json", "sha256sums.txt", "table.csv", "summary.txt", "instances"


@dataclasses.dataclass
class Pick:
    """One chosen entry, its size group and its hardness quantile within that group."""

    entry: Entry
    size_group: int
    quantile: float | None
    value: float | None


@dataclasses.dataclass
class SuiteResult:
    directory: Path
    picks: list[Pick]
    metric: str | None
    notes: list[str]
    files: list[Path]


def _size_groups(entries, groups: int) -> dict[int, int]:
    """n -> size group (0-based), grouping neighbouring sizes when there are many."""
    counts = Counter(e.n for e in entries)
    sizes = sorted(counts)
    if len(sizes) <= groups:
        return {n: k for k, n in enumerate(sizes)}
    total, before, out = sum(counts.values()), 0, {}
    for n in sizes:
        out[n] = min(groups - 1, before * groups // total)
        before += counts[n]
    ranks = {g: k for k, g in enumerate(sorted(set(out.values())))}
    return {n: ranks[g] for n, g in out.items()}


def _share(count: int, available: list[int]) -> list[int]:
    """Share ``count`` over groups as evenly as their sizes allow (deterministic)."""
    alloc, left = [0] * len(available), count
    while left:
        open_ = [i for i, a in enumerate(available) if alloc[i] < a]
        if not open_:
            break
        each = max(1, left // len(open_))
        for i in sorted(open_, key=lambda i: (alloc[i] - available[i], i)):
            take = min(each, available[i] - alloc[i], left)
            alloc[i] += take
            left -= take
            if not left:
                break
    return alloc


def pick_stratified(entries: list[Entry], count: int, metric: str | None = None, solver: str | None = None,
                    size_groups: int = 4) -> tuple[list[Pick], list[str]]:
    """Pick ``count`` entries stratified by size and by quantiles of ``metric``.

    With ``metric=None`` the metric measured on the most entries is used; with
    no measurements at all the pick is by size only.  Returns the picks and
    notes about what was left out.

    >>> pick_stratified([], 0)
    ([], [])
    """
    if count < 0 or size_groups < 1:
        raise InputError("the count must be >= 0 and the number of size groups >= 1")
    notes = []
    if metric is None:
        seen = Counter(s.metric for e in entries for s in e.scores if solver in (None, s.solver))
        metric = seen.most_common(1)[0][0] if seen else None
    if metric is not None:
        have = [e for e in entries if known(e.latest(metric, solver))]
        if len(have) < len(entries):
            notes.append(f"{len(entries) - len(have)} matching entries have no {metric} measurement "
                         "with a value and were left out")
        entries = have
    elif entries:
        notes.append("no hardness measurements: picked by size only")
    if count > len(entries):
        raise InputError(f"only {len(entries)} entries qualify; ask for at most {len(entries)}")
    group_of = _size_groups(entries, size_groups)
    groups: list[list[Entry]] = [[] for _ in range(len(set(group_of.values())))]
    for e in entries:
        groups[group_of[e.n]].append(e)

    def value(e):
        return None if metric is None else e.latest(metric, solver).value

    picks = []
    for g, (members, k) in enumerate(zip(groups, _share(count, [len(x) for x in groups]))):
        members.sort(key=lambda e: (0.0 if metric is None else value(e), e.fingerprint))
        size = len(members)
        for i in range(k):
            idx = int((i + 0.5) * size / k)
            quantile = (idx + 0.5) / size if metric is not None else None
            picks.append(Pick(members[idx], g, quantile, value(members[idx])))
    return picks, notes


def _sha256(path: Path) -> str:
    h = hashlib.sha256()
    with open(path, "rb") as fh:
        for block in iter(lambda: fh.read(1 << 20), b""):
            h.update(block)
    return h.hexdigest()


def make_suite(library: Library, count: int, directory, metric: str | None = None, solver: str | None = None,
               size_groups: int = 4, formats=("json",), include_not_proven: bool = False,
               **filters) -> SuiteResult:
    """Pick ``count`` entries (see :func:`pick_stratified`) and write them as a suite.

    ``filters`` are those of :meth:`Library.list`.  Only certified entries
    qualify unless ``include_not_proven``.  ``directory`` must be new or
    empty; nothing existing is overwritten.

    Examples
    --------
    >>> import tempfile
    >>> from instgen.make import make_instance
    >>> d = tempfile.mkdtemp()
    >>> with Library.open(d + "/lib", create=True) as lib:
    ...     for seed in range(3):
    ...         _ = lib.add(make_instance("chimera:1", "gaussian", seed=seed))
    ...     result = make_suite(lib, 2, d + "/suite", include_not_proven=True)
    >>> len(result.picks), verify_suite(d + "/suite").ok
    (2, True)
    """
    formats = [formats] if isinstance(formats, str) else list(formats)
    if "json" not in formats:
        formats.insert(0, "json")
    for f in formats:
        FORMATS.get(f)
    directory = Path(directory)
    if directory.exists() and (not directory.is_dir() or any(directory.iterdir())):
        raise InputError(f"{directory} exists and is not empty; a suite goes into a new or empty folder")
    if not include_not_proven:
        filters["certified"] = True
    entries = library.list(**filters)
    picks, notes = pick_stratified(entries, count, metric, solver, size_groups)
    if metric is None and picks and not any("size only" in x for x in notes):
        metric = Counter(s.metric for p in picks for s in p.entry.scores).most_common(1)[0][0]
    files = []
    for k, p in enumerate(picks, 1):
        inst = p.entry.instance()
        for f in formats:
            files += export_instance(inst, directory / INSTANCES / f"{k:02d}-{p.entry.id}", f)
    pairs = sorted({(s.metric, s.solver) for p in picks for s in p.entry.scores})
    files.append(atomic_write(directory / TABLE, _table(picks, metric, solver, pairs)))
    files.append(atomic_write(directory / SUMMARY, _summary(library, picks, metric, solver, notes,
                                                            include_not_proven)))
    manifest = {
        "format": SUITE_FORMAT, "format_version": SUITE_VERSION, "created": schema.now(),
        "tool_version": __version__, "count": len(picks), "metric": metric, "solver": solver,
        "size_groups": size_groups, "certified_only": not include_not_proven, "filters": filters,
        "formats": formats, "notes": notes,
        "instances": [{"file": f"{INSTANCES}/{k:02d}-{p.entry.id}.json", "fingerprint": p.entry.fingerprint,
                       "graph": p.entry.graph, "n": p.entry.n, "m": p.entry.m,
                       "optimum": None if p.entry.certificate is None else p.entry.certificate.energy,
                       "optimum_status": None if p.entry.certificate is None else p.entry.certificate.status,
                       "size_group": p.size_group, "hardness_quantile": p.quantile, "value": p.value}
                      for k, p in enumerate(picks, 1)],
        "files": {str(f.relative_to(directory)): _sha256(f) for f in files},
    }
    files.append(atomic_write(directory / MANIFEST, json.dumps(json_safe(manifest), indent=2, default=str) + "\n"))
    sums = "".join(f"{_sha256(f)}  {f.relative_to(directory)}\n" for f in files)
    files.append(atomic_write(directory / SUMS, sums))
    return SuiteResult(directory, picks, metric, notes, files)


def _fmt(v) -> str:
    return "" if v is None else (f"{v:.6g}" if isinstance(v, float) else str(v))


def _table(picks, metric, solver, pairs) -> str:
    buf = _io.StringIO()
    w = csv.writer(buf, lineterminator="\n")
    w.writerow(["position", "id", "file", "graph", "spins", "couplers", "field_alphabet", "coupling_alphabet", "optimum", "optimum_status",
                "optimum_method", "ground_states", "size_group", "hardness_quantile", "metric", "solver", "value",
                "ci_low", "ci_high", *[f"{m}[{s}]" if s else m for m, s in pairs], "fingerprint"])
    for k, p in enumerate(picks, 1):
        e, c = p.entry, p.entry.certificate
        s = e.latest(metric, solver) if metric else None
        ci = (s.ci if s is not None and s.ci else None) or (None, None)
        others = [e.latest(m, sv) for m, sv in pairs]
        w.writerow([k, e.id, f"{INSTANCES}/{k:02d}-{e.id}.json", e.graph, e.n, e.m, int(e.has_fields),
                    e.couplings or "", _fmt(c and c.energy), c.status if c else "no certificate",
                    c.method if c else "", _fmt(c and c.ground_states), p.size_group + 1, _fmt(p.quantile),
                    metric or "", s.solver if s else "", _fmt(p.value), _fmt(ci[0]), _fmt(ci[1]),
                    *[_fmt(o.value) if o else "" for o in others], e.fingerprint])
    return buf.getvalue()


def _summary(library, picks, metric, solver, notes, include_not_proven) -> str:
    lines = [f"instgen suite: {len(picks)} instances from {library.root} (instgen {__version__}, {schema.now()})"]
    how = (f"size group and hardness quantiles of {metric}" + (f" ({solver})" if solver else "")
           if metric else "size only")
    lines.append(f"picked by {how}; "
                 + ("planted, proven and not proven entries" if include_not_proven else "planted and proven entries only"))
    for g in sorted({p.size_group for p in picks}):
        group = [p for p in picks if p.size_group == g]
        sizes = sorted({p.entry.n for p in group})
        line = f"  size group {g + 1}: n = {', '.join(map(str, sizes))}; {len(group)} instances"
        values = [p.value for p in group if p.value is not None]
        if values:
            line += f"; {metric} from {min(values):.4g} to {max(values):.4g}"
        lines.append(line)
    not_proven = sum(not p.entry.certified for p in picks)
    lines.append(f"optimum: {len(picks) - not_proven} planted or proven"
                 + (f", {not_proven} not proven (the best state found is no proof)" if not_proven else ""))
    lines += [f"note: {x}" for x in notes]
    lines.append(f"check on any machine: `instgen library check-suite DIR` or `sha256sum -c {SUMS}`")
    return "\n".join(lines) + "\n"


def verify_suite(directory) -> VerifyReport:
    """Re-check a suite folder: checksums, instances, optimum energies.

    Needs only the folder (not the library it came from).  Every file in the
    manifest must be present with its checksum; each instance must have the
    fingerprint the manifest records and an optimum whose energy recomputes
    from the file; other exported formats are checked with
    :func:`instgen.export.check_export`.
    """
    directory = Path(directory)
    try:
        manifest = json.loads((directory / MANIFEST).read_text(encoding="utf-8"))
    except FileNotFoundError:
        raise InputError(f"{directory} has no {MANIFEST}: not a suite folder, or its writing was interrupted") from None
    except (OSError, ValueError) as exc:
        raise FormatError(f"{directory / MANIFEST} cannot be read ({exc})") from None
    if not isinstance(manifest, dict) or manifest.get("format") != SUITE_FORMAT:
        raise FormatError(f"{directory / MANIFEST} is not an instgen suite manifest")
    if not isinstance(manifest.get("format_version"), int) or manifest["format_version"] > SUITE_VERSION:
        raise FormatError(f"{directory / MANIFEST} has format_version {manifest.get('format_version')!r}, "
                          f"newer than this instgen reads ({SUITE_VERSION}); upgrade instgen")
    problems, notes = [], []
    listed = manifest.get("files", {})
    for rel, digest in sorted(listed.items()):
        path = directory / rel
        if not path.is_file():
            problems.append(f"{rel} is missing")
        elif _sha256(path) != digest:
            problems.append(f"{rel} does not match its checksum (changed or damaged)")
    for item in manifest.get("instances", []):
        rel = item.get("file", "?")
        if rel not in listed or not (directory / rel).is_file():
            continue
        try:
            inst = load_instance(directory / rel)
        except FormatError as exc:
            problems.append(f"{rel}: {exc}")
            continue
        if fingerprint(inst) != item.get("fingerprint"):
            problems.append(f"{rel} holds a different instance than the manifest records")
        cert = inst.metadata.get("certificate")
        if item.get("optimum") is not None:
            if not cert:
                problems.append(f"{rel} carries no certificate but the manifest states an optimum")
            elif abs(inst.energy(cert["state"]) - item["optimum"]) > energy_tolerance(inst):
                problems.append(f"{rel}: the optimum state's energy is not the optimum the manifest states")
    for rel in sorted(listed):
        fmt = next((f for f in manifest.get("formats", []) if f != "json" and rel.endswith(FORMATS.get(f).suffix)), None)
        if fmt and rel.startswith(INSTANCES + "/") and (directory / rel).is_file() \
                and not rel.endswith(".ground.json"):
            try:
                if not check_export(directory / rel, fmt).agrees:
                    problems.append(f"{rel}: the optimum energy recomputed from the file differs from the one it states")
            except InputError as exc:
                notes.append(f"{rel}: {exc}")
            except FormatError as exc:
                problems.append(f"{rel}: {exc}")
    extra = sorted(str(p.relative_to(directory)) for p in directory.rglob("*")
                   if p.is_file() and str(p.relative_to(directory)) not in listed and p.name not in (MANIFEST, SUMS))
    if extra:
        notes.append(f"{len(extra)} file(s) not in the manifest: " + ", ".join(extra[:5]))
    return VerifyReport(len(manifest.get("instances", [])), problems, notes)
