"""Exports for other tools, each with its conventions stated in the file.

Every format below writes the instance with E(s) = Σ h_i s_i + Σ_(i<j) J_ij s_i s_j,
s ∈ {−1,+1} (J > 0 antiferromagnetic), or the QUBO form of it, together with the
optimum state where one is known (certified, planted or best found; the status
is written beside it).  :func:`check_export` reads an exported file back with
the reference reader (dimod, scipy.io, numpy) and recomputes the energy of that
state from the file alone.

======== ====================== ===================================================
name     file                   conventions
======== ====================== ===================================================
json     ``.json``              our instance file (:mod:`instgen.io`), full metadata
dimod    ``.bqm`` +             dimod's BQM file (``BinaryQuadraticModel.to_file``),
         ``.ground.json``       SPIN vartype, graph labels, no offset; dimod's file
                                has no room for a state, so the optimum goes beside
                                it as a dimod ``SampleSet`` (``to_serializable``)
ising-mtx ``.ising.mtx``        Matrix Market coordinate real general: M_ij = J_ij
                                for i < j (upper triangle only), M_ii = h_i, so
                                E(s) = Σ_i M_ii s_i + Σ_(i≠j) M_ij s_i s_j; spins are
                                rows/columns 1..n (Matrix Market counts from 1)
qubo-mtx ``.qubo.mtx``          Matrix Market, x_i = (s_i + 1)/2 (x = 1 is spin up),
                                Q upper triangular: Q_ij = 4 J_ij (i < j),
                                Q_ii = 2 h_i − 2 Σ_j J_ij; E_qubo(x) = xᵀ Q x and
                                E_ising(s) = E_qubo(x) + offset with
                                offset = Σ J − Σ h, i.e. E_qubo(x*) = E_ising(s*) − offset
edgelist ``.txt``               ``# `` header (n, m, convention), then ``i j J``
                                lines (0-based, i < j) and ``i h`` lines (non-zero
                                fields only)
npz      ``.npz``               NumPy arrays edges (m,2, 0-based, i<j), J, h,
                                labels_json, optimum_state, optimum_energy, ...;
                                load with ``numpy.load(allow_pickle=False)``
======== ====================== ===================================================

Text formats write numbers with the shortest repr that reads back exactly.
"""

from __future__ import annotations

import dataclasses
import io as _io
import json
from collections.abc import Callable
from pathlib import Path

import numpy as np

from .errors import FormatError, InputError
from .instance import Instance
from .io import atomic_write, load_instance, save_instance
from .records import Certificate
from .registry import Registry

EXPORT_VERSION = 1
_CHUNK = 64  # spins (or label characters x4) per header line
_ISING = "E(s) = sum_i h_i s_i + sum_{i<j} J_ij s_i s_j with s_i in {-1,+1} (J > 0 antiferromagnetic)"

FORMATS = Registry("export format")


@dataclasses.dataclass(frozen=True)
class ExportFormat:
    """One export format: how to write it and how to check it."""

    name: str
    suffix: str
    summary: str
    write: Callable[[Instance, Path], list[Path]]
    check: Callable[[Path], ExportCheck]
    companion: str | None = None  # suffix of a second file written beside the first


@dataclasses.dataclass(frozen=True)
class ExportCheck:
    """What :func:`check_export` recomputed from an exported file.

    ``energy`` is the optimum state's energy recomputed from the file in the
    file's own convention; ``stated`` the optimum the file states (same
    convention); ``ising_energy = energy + offset`` the same in the Ising
    convention; ``status`` how the optimum is known (``planted``, ``proven``
    or ``not proven``) and ``agrees`` whether recomputed and stated match.
    """

    format: str
    path: Path
    energy: float
    stated: float
    offset: float
    status: str
    agrees: bool

    @property
    def ising_energy(self) -> float:
        return self.energy + self.offset


# ------------------------------------------------------------------- helpers
def optimum_of(inst: Instance) -> tuple[np.ndarray, float, str, str] | None:
    """(state, energy, status, method) of the best known state, or None."""
    cert = inst.metadata.get("certificate")
    if cert:
        try:
            c = Certificate.from_dict(cert)
        except (TypeError, ValueError, KeyError) as exc:
            raise FormatError(f"the instance's certificate is malformed: {exc}") from None
        return np.asarray(c.state, dtype=np.int8), inst.energy(c.state), c.status, c.method
    if inst.planted is not None:
        return inst.planted, float(inst.planted_energy), "planted", "planted by construction"
    return None


def _status_words(status: str) -> str:
    return {"planted": "planted ground state (by construction)", "proven": "proven ground state"}.get(
        status, "best state found, not proven optimal")


def _chunks(key: str, text: str, size: int) -> list[str]:
    return [f"{key}: {text[k:k + size]}" for k in range(0, max(len(text), 1), size)]


def _header(inst: Instance, lines: list[str], state_key: str, state_text, energy_key: str, opt) -> list[str]:
    out = [lines[0], f"n: {inst.n}", f"m: {inst.m}", *lines[1:]]
    if list(inst.labels) != list(range(inst.n)):
        labels = json.dumps([list(x) if isinstance(x, tuple) else x for x in inst.labels], separators=(",", ":"))
        out.append("spin labels: a JSON list in spin order (first entry = first spin), split over the lines below")
        out += _chunks("labels", labels, 4 * _CHUNK)
    if opt is not None:
        state, energy, status, method = opt
        out.append(f"{energy_key}: {energy!r}")
        out.append(f"optimum status: {status} ({_status_words(status)}; method: {method})")
        out += _chunks(state_key, state_text(state), _CHUNK)
    else:
        out.append("optimum: not known (no certificate or planted state)")
    return out


def _read_header(lines) -> dict[str, str]:
    fields: dict[str, str] = {}
    for line in lines:
        key, sep, value = line.partition(": ")
        if sep:
            fields[key.strip()] = fields.get(key.strip(), "") + value.rstrip("\n")
    return fields


def _need(fields: dict, key: str, path: Path) -> str:
    if key not in fields:
        raise InputError(f"{path} states no '{key}': it carries no optimum to check "
                         "(was it exported from an instance without a certificate, or edited?)")
    return fields[key]


def _number(text: str, what: str, path: Path) -> float:
    try:
        return float(text)
    except ValueError:
        raise FormatError(f"{path}: '{what}' is not a number ({text!r})") from None


def _pm(state) -> str:
    return "".join("+" if v > 0 else "-" for v in state)


def _bits(state) -> str:
    return "".join("1" if v > 0 else "0" for v in state)


def _parse_state(text: str, alphabet: str, n: int, path: Path) -> np.ndarray:
    if len(text) != n or set(text) - set(alphabet):
        raise FormatError(f"{path}: the optimum state is damaged (expected {n} characters of {alphabet!r})")
    return np.array([1 if ch == alphabet[1] else -1 for ch in text], dtype=np.int8)


def _close(a: float, b: float, scale: float) -> bool:
    return abs(a - b) <= 1e-9 * max(1.0, scale)


def _check(fmt, path, energy, stated, offset, status, scale) -> ExportCheck:
    return ExportCheck(fmt, Path(path), float(energy), float(stated), float(offset), status,
                       _close(energy, stated, scale))


def _status_of(fields: dict) -> str:
    return Certificate.status_of(fields.get("optimum status"))


# ---------------------------------------------------------------------- json
def _write_json(inst: Instance, path: Path) -> list[Path]:
    return [save_instance(inst, path)]


def _check_json(path: Path) -> ExportCheck:
    inst = load_instance(path)
    opt = optimum_of(inst)
    if opt is None:
        raise InputError(f"{path} carries no certificate or planted state to check")
    state, energy, status, _ = opt
    stated = inst.metadata.get("certificate", {}).get("energy", energy)
    return _check("json", path, energy, stated, 0.0, status, float(np.abs(inst.J).sum() + np.abs(inst.h).sum()))


# --------------------------------------------------------------------- dimod
def _ground_path(path: Path) -> Path:
    return path.with_suffix(".ground.json")


def _write_dimod(inst: Instance, path: Path) -> list[Path]:
    import dimod

    bqm = inst.to_bqm("SPIN")
    # The optimum goes to disk first: an export stopped between the two files leaves a
    # spare .ground.json, never a BQM whose promised optimum is missing.
    ground = []
    opt = optimum_of(inst)
    if opt is not None:
        state, _, status, method = opt
        sample = {lab: int(v) for lab, v in zip(inst.labels, state)}
        ss = dimod.SampleSet.from_samples_bqm(sample, bqm, info={"status": status, "method": method})
        ground.append(atomic_write(_ground_path(path), json.dumps(ss.to_serializable()) + "\n"))
    with bqm.to_file() as fh:
        return [atomic_write(path, fh.read())] + ground


def _check_dimod(path: Path) -> ExportCheck:
    import dimod

    try:
        with open(path, "rb") as fh:
            bqm = dimod.BinaryQuadraticModel.from_file(fh)
    except OSError as exc:
        raise FormatError(f"{path}: cannot read ({exc.strerror})") from None
    except Exception as exc:  # dimod raises assorted errors for damaged files
        raise FormatError(f"{path} is not a readable dimod BQM file ({exc})") from None
    ground = _ground_path(path)
    if not ground.exists():
        raise InputError(f"{ground} is missing: the dimod export carries its optimum state in that file")
    try:
        ss = dimod.SampleSet.from_serializable(json.loads(ground.read_text()))
    except Exception as exc:
        raise FormatError(f"{ground} is not a readable dimod sample set ({exc})") from None
    first = ss.first
    scale = sum(abs(v) for v in bqm.linear.values()) + sum(abs(v) for v in bqm.quadratic.values())
    return _check("dimod", path, bqm.energy(first.sample), first.energy, bqm.offset,
                  Certificate.status_of(ss.info.get("status")), scale)


# ------------------------------------------------------------ Matrix Market
def _mm_write(path: Path, matrix, comment_lines: list[str]) -> list[Path]:
    import scipy.io

    buf = _io.BytesIO()
    scipy.io.mmwrite(buf, matrix, comment="\n".join(comment_lines), field="real", symmetry="general")
    return [atomic_write(path, buf.getvalue())]


def _mm_read(path: Path):
    import scipy.io
    import scipy.sparse as sp

    try:
        matrix = sp.csr_matrix(scipy.io.mmread(path))
        with open(path, encoding="utf-8") as fh:
            comments = []
            for line in fh:
                if not line.startswith("%"):
                    break
                comments.append(line[1:])
    except OSError as exc:
        raise FormatError(f"{path}: cannot read ({exc.strerror})") from None
    except (ValueError, UnicodeDecodeError) as exc:
        raise FormatError(f"{path} is not a readable Matrix Market file ({exc})") from None
    return matrix, _read_header(comments)


def _upper(inst: Instance, J, diag):
    import scipy.sparse as sp

    nz = np.flatnonzero(diag)
    rows = np.concatenate([inst.edges[:, 0], nz])
    cols = np.concatenate([inst.edges[:, 1], nz])
    return sp.coo_matrix((np.concatenate([J, diag[nz]]), (rows, cols)), shape=(inst.n, inst.n))


def qubo_matrix(inst: Instance):
    """(Q, offset): upper-triangular QUBO matrix with E_ising(s) = xᵀQx + offset, x = (s+1)/2.

    >>> inst = Instance(edges=[[0, 1]], J=[1.0], h=[0.5, 0.0])
    >>> Q, offset = qubo_matrix(inst)
    >>> x = np.array([1, 0]); float(x @ Q.toarray() @ x + offset) == inst.energy([1, -1])
    True
    """
    deg = np.zeros(inst.n)
    np.add.at(deg, inst.edges[:, 0], inst.J)
    np.add.at(deg, inst.edges[:, 1], inst.J)
    offset = float(inst.J.sum() - inst.h.sum())
    return _upper(inst, 4.0 * inst.J, 2.0 * inst.h - 2.0 * deg), offset


def _write_ising_mtx(inst: Instance, path: Path) -> list[Path]:
    lines = [f"instgen Ising coupling matrix (export format_version {EXPORT_VERSION})",
             "energy: E(s) = sum_i M_ii s_i + sum_{i<j} M_ij s_i s_j, s_i in {-1,+1}",
             "convention: upper triangle only (row < column) holds J_ij; the diagonal holds the field h_i;",
             "convention: row/column k is spin k-1 of the instance (Matrix Market counts from 1)"]
    lines = _header(inst, lines, "optimum s", _pm, "optimum energy", optimum_of(inst))
    return _mm_write(path, _upper(inst, inst.J, inst.h), lines)


def _check_ising_mtx(path: Path) -> ExportCheck:
    M, fields = _mm_read(path)
    s = _parse_state(_need(fields, "optimum s", path), "-+", M.shape[0], path).astype(np.float64)
    d = M.diagonal()
    energy = float(d @ s + s @ (M @ s) - d @ (s * s))  # off-diagonal part: M minus its diagonal
    stated = _number(_need(fields, "optimum energy", path), "optimum energy", path)
    return _check("ising-mtx", path, energy, stated, 0.0, _status_of(fields), float(abs(M).sum()))


def _write_qubo_mtx(inst: Instance, path: Path) -> list[Path]:
    Q, offset = qubo_matrix(inst)
    opt = optimum_of(inst)
    if opt is not None:
        opt = (opt[0], opt[1] - offset, opt[2], opt[3])
    lines = [f"instgen QUBO matrix (export format_version {EXPORT_VERSION})",
             "variables: x_i = (s_i + 1)/2 in {0,1}; x_i = 1 means spin up (s_i = +1)",
             "energy: E_qubo(x) = sum_i Q_ii x_i + sum_{i<j} Q_ij x_i x_j = x^T Q x (Q upper triangular)",
             "convention: row/column k is variable k-1 of the instance (Matrix Market counts from 1)",
             "convention: E_ising(s) = E_qubo(x) + offset, so E_qubo(x*) = E_ising(s*) - offset",
             f"offset: {offset!r}"]
    lines = _header(inst, lines, "optimum x", _bits, "optimum energy (QUBO)", opt)
    return _mm_write(path, Q, lines)


def _check_qubo_mtx(path: Path) -> ExportCheck:
    Q, fields = _mm_read(path)
    x = (_parse_state(_need(fields, "optimum x", path), "01", Q.shape[0], path) > 0).astype(np.float64)
    energy = float(x @ (Q @ x))
    stated = _number(_need(fields, "optimum energy (QUBO)", path), "optimum energy (QUBO)", path)
    offset = _number(_need(fields, "offset", path), "offset", path)
    return _check("qubo-mtx", path, energy, stated, offset, _status_of(fields), float(abs(Q).sum()))


# ------------------------------------------------------------------ edge list
def _write_edgelist(inst: Instance, path: Path) -> list[Path]:
    lines = [f"instgen edge list (export format_version {EXPORT_VERSION})",
             f"energy: {_ISING}",
             "convention: lines 'i j J' are couplings between spins i < j; lines 'i h' are fields;",
             "convention: spins are numbered 0..n-1; only non-zero fields are listed"]
    lines = _header(inst, lines, "optimum s", _pm, "optimum energy", optimum_of(inst))
    body = [f"{i} {j} {v!r}" for (i, j), v in zip(inst.edges.tolist(), inst.J.tolist())]
    body += [f"{i} {float(inst.h[i])!r}" for i in np.flatnonzero(inst.h).tolist()]
    return [atomic_write(path, "".join(f"# {x}\n" for x in lines) + "".join(f"{x}\n" for x in body))]


def read_edgelist(path) -> tuple[Instance, dict[str, str]]:
    """Read an exported edge list back: (instance on spins 0..n-1, header fields)."""
    path = Path(path)
    try:
        text = path.read_text(encoding="utf-8")
    except (OSError, UnicodeDecodeError) as exc:
        raise FormatError(f"{path}: cannot read as text ({exc})") from None
    header, edges, J, fields = [], [], [], {}
    for k, line in enumerate(text.splitlines(), 1):
        if line.startswith("#"):
            header.append(line[1:].lstrip())
            continue
        parts = line.split()
        try:
            if len(parts) == 3:
                edges.append((int(parts[0]), int(parts[1])))
                J.append(float(parts[2]))
            elif len(parts) == 2:
                fields[int(parts[0])] = float(parts[1])
            elif parts:
                raise ValueError
        except ValueError:
            raise FormatError(f"{path}, line {k}: expected 'i j J' or 'i h', got {line!r}") from None
    head = _read_header(header)
    n = int(_number(_need(head, "n", path), "n", path))
    h = np.zeros(n)
    try:
        for i, v in fields.items():
            h[i] = v
        inst = Instance(edges=np.array(edges, dtype=np.int64).reshape(-1, 2), J=J, h=h, n=n)
    except (IndexError, InputError) as exc:
        raise FormatError(f"{path}: {exc}") from None
    return inst, head


def _check_edgelist(path: Path) -> ExportCheck:
    inst, head = read_edgelist(path)
    s = _parse_state(_need(head, "optimum s", path), "-+", inst.n, path)
    stated = _number(_need(head, "optimum energy", path), "optimum energy", path)
    return _check("edgelist", path, inst.energy(s), stated, 0.0, _status_of(head),
                  float(np.abs(inst.J).sum() + np.abs(inst.h).sum()))


# ---------------------------------------------------------------------- npz
def _write_npz(inst: Instance, path: Path) -> list[Path]:
    labels = json.dumps([list(x) if isinstance(x, tuple) else x for x in inst.labels])
    arrays = {"edges": inst.edges, "J": inst.J, "h": inst.h, "labels_json": np.array(labels),
              "convention": np.array(_ISING), "format_version": np.array(EXPORT_VERSION)}
    opt = optimum_of(inst)
    if opt is not None:
        arrays.update(optimum_state=opt[0].astype(np.int8), optimum_energy=np.array(opt[1]),
                      optimum_status=np.array(opt[2]))
    buf = _io.BytesIO()
    np.savez_compressed(buf, **arrays)
    return [atomic_write(path, buf.getvalue())]


def _check_npz(path: Path) -> ExportCheck:
    try:
        with np.load(path, allow_pickle=False) as z:
            data = {k: z[k] for k in z.files}
    except (OSError, ValueError) as exc:
        raise FormatError(f"{path} is not a readable NumPy .npz file ({exc})") from None
    for key in ("edges", "J", "h", "optimum_state", "optimum_energy"):
        if key not in data:
            raise InputError(f"{path} holds no '{key}' array: nothing to check")
    s = data["optimum_state"].astype(np.float64)
    e, J, h = data["edges"], data["J"], data["h"]
    energy = float(h @ s + np.sum(J * s[e[:, 0]] * s[e[:, 1]]))
    status = Certificate.status_of(data["optimum_status"] if "optimum_status" in data else None)
    return _check("npz", path, energy, float(data["optimum_energy"]), 0.0, status,
                  float(np.abs(J).sum() + np.abs(h).sum()))


for _fmt in (
    ExportFormat("json", ".json", "instgen instance file (JSON), full metadata", _write_json, _check_json),
    ExportFormat("dimod", ".bqm", "dimod BQM file (SPIN) + optimum as a dimod SampleSet", _write_dimod,
                 _check_dimod, companion=".ground.json"),
    ExportFormat("ising-mtx", ".ising.mtx", "Matrix Market: J upper triangle, h on the diagonal",
                 _write_ising_mtx, _check_ising_mtx),
    ExportFormat("qubo-mtx", ".qubo.mtx", "Matrix Market QUBO, x=(s+1)/2, offset in the header",
                 _write_qubo_mtx, _check_qubo_mtx),
    ExportFormat("edgelist", ".txt", "plain text 'i j J' and 'i h' lines with a # header",
                 _write_edgelist, _check_edgelist),
    ExportFormat("npz", ".npz", "NumPy arrays (edges, J, h, labels, optimum)", _write_npz, _check_npz),
):
    FORMATS.register(_fmt.name, _fmt)


def targets(stem, fmt: str) -> list[Path]:
    """Every file :func:`export_instance` writes for ``stem`` (a path without suffix)."""
    f = FORMATS.get(fmt)
    main = Path(str(stem) + f.suffix)
    return [main] + ([_ground_path(main)] if f.companion else [])


def export_instance(inst: Instance, stem, fmt: str) -> list[Path]:
    """Write ``inst`` as ``stem`` + the format's suffix; returns the files written.

    Examples
    --------
    >>> import tempfile
    >>> from instgen.make import make_instance
    >>> inst = make_instance("chimera:1", seed=1)
    >>> d = tempfile.mkdtemp()
    >>> [p.name for p in export_instance(inst, f"{d}/x", "qubo-mtx")]
    ['x.qubo.mtx']
    """
    f = FORMATS.get(fmt)
    return f.write(inst, targets(stem, fmt)[0])


def check_export(path, fmt: str) -> ExportCheck:
    """Recompute the optimum's energy from an exported file alone.

    Reads the file with the reference reader of its format (dimod for
    ``dimod``, ``scipy.io.mmread`` for the Matrix Market ones, ``numpy.load``
    for ``npz``), takes the optimum state written in it, and returns its energy
    in the file's own convention beside the energy the file states.

    >>> import tempfile
    >>> from instgen.records import Certificate
    >>> inst = Instance(edges=[[0, 1]], J=[1.0], h=[0.0, 0.0])
    >>> cert = Certificate(energy=-1.0, state=np.array([1, -1]), method="by hand", status="proven")
    >>> inst = inst.replace(metadata={"certificate": cert.to_dict()})
    >>> d = tempfile.mkdtemp()
    >>> r = check_export(export_instance(inst, f"{d}/x", "qubo-mtx")[0], "qubo-mtx")
    >>> r.energy, r.offset, r.ising_energy, r.agrees
    (-2.0, 1.0, -1.0, True)
    """
    path = Path(path)
    if not path.exists():
        raise InputError(f"{path}: no such file")
    return FORMATS.get(fmt).check(path)
