"""``export``: write the hand-off directory; ``read_export``: read it back."""

from __future__ import annotations

import hashlib
import io
import os
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import numpy as np

from ..fileio import atomic_write_bytes, dumps_json
from ..formats import q_notation
from ..inputs import load_codes
from ..kernel import Emulation, build_integer_network, emulate
from ..network import Network, as_codes
from ..plan import Plan
from ..version import VERSION
from ._design import FILES, VHDL_PACKAGE, Design, LayerDesign, describe, vector_file
from ._directory import write_directory
from ._languages import c_header, verilog_include, vhdl_package
from ._memh import hex_digits, memh_text
from ._read import MANIFEST_KIND, ExportedDesign, ExportedLayer, read_export

__all__ = ["export", "read_export", "ExportResult", "ExportedDesign", "ExportedLayer", "MANIFEST_KIND"]

_ADDRESS_LAYOUT = (
    "offset binary: address = index - index_min = index + 2^(table_bits-1); address 0 holds the most negative index"
)
_ORDER = "sample-major: word t * n + j is item j of sample t"


@dataclass(frozen=True)
class ExportResult:
    """What :func:`export` wrote."""

    directory: Path
    files: tuple[str, ...]  # relative names, manifest first
    manifest: dict[str, Any] = field(repr=False)
    n_vectors: int | None

    def summary(self) -> str:
        """One deterministic line: how many files, where, how many vectors."""
        vec = "no golden vectors" if self.n_vectors is None else f"{self.n_vectors} golden vectors"
        return f"exported {len(self.files)} files to {self.directory} ({vec})"


# ---------------------------------------------------------------------------------
# golden vectors
def _vector_input(network: Network, vectors: Any) -> tuple[np.ndarray, str]:
    if isinstance(vectors, (str, os.PathLike)):
        got = load_codes(vectors, network)
        return got.codes, got.source
    if isinstance(vectors, np.ndarray):
        return vectors, "array"
    raise TypeError(f"vectors must be None, a file name or an array of codes, not {type(vectors).__name__}")


def _sha256(data: bytes) -> str:
    return hashlib.sha256(data).hexdigest()


def decimal_rows(matrix: np.ndarray, chunk: int = 1 << 16) -> str:
    """Integer rows as comma-separated decimal lines (vectorised; same text as ``%d``).

    >>> decimal_rows(np.array([[0, -7, 120], [5, 10, -1]]))
    '0,-7,120\\n5,10,-1\\n'
    """
    m = np.asarray(matrix, dtype=np.int64)
    if m.ndim != 2 or m.size == 0:
        raise ValueError(f"matrix must be a non-empty 2-D array, not shape {m.shape}")
    if int(m.min()) < -(1 << 62) or int(m.max()) > (1 << 62):
        raise ValueError("matrix values must be within +-2^62")
    mag = np.abs(m)
    if int(mag.max()) < (1 << 31):
        mag = mag.astype(np.int32)
    n_dig = len(str(int(mag.max())))
    ten = mag.dtype.type(10)
    out = io.BytesIO()
    for start in range(0, m.shape[0], chunk):
        a, neg = mag[start : start + chunk], m[start : start + chunk] < 0
        rows, cols = a.shape
        cell = np.empty((rows, cols, n_dig + 2), dtype=np.uint8)
        cell[..., 0] = ord("-")
        digits = np.ones((rows, cols), dtype=np.int8)
        rest = a.copy()
        for d in range(n_dig, 0, -1):
            q = rest // ten
            cell[..., d] = (rest - q * ten).astype(np.uint8) + ord("0")
            rest = q
            if d > 1:
                digits += (a >= 10 ** (n_dig - d + 1)).astype(np.int8)
        cell[..., n_dig + 1] = ord(",")
        cell[:, -1, n_dig + 1] = ord("\n")
        keep = np.empty(cell.shape, dtype=bool)
        keep[..., 0] = neg
        keep[..., 1 : n_dig + 1] = np.arange(n_dig) >= (n_dig - digits)[..., None]
        keep[..., n_dig + 1] = True
        out.write(cell[keep].tobytes())
    return out.getvalue().decode("ascii")


def _vector_files(design: Design, em: Emulation) -> tuple[dict[str, str], dict[str, Any]]:
    arrays = em.npz_arrays()
    n = em.n
    texts: dict[str, str] = {}
    info: dict[str, Any] = {}

    def add(key: str, values: np.ndarray, width: int, signed: bool, title: str) -> None:
        rel = vector_file(key)
        texts[rel] = memh_text(values.ravel(), width, title)
        info[key] = {
            "file": rel, "words": int(values.size), "per_sample": int(values.size // n) if n else 0,
            "word_bits": width, "hex_digits": hex_digits(width), "signed": signed,
        }  # fmt: skip

    add("inputs", em.inputs, design.input_bits, False, f"fxnet golden vectors: {n} x {design.n_inputs} input codes")
    columns = ["sample"] + [f"IN_{i}" for i in design.input_ids]
    blocks = [np.arange(n, dtype=np.int64)[:, None], em.inputs.astype(np.int64)]
    for L in design.layers:
        acc = arrays[f"acc_{L.number}"].reshape(n, L.n_out)
        codes = arrays[f"codes_{L.number}"].reshape(n, L.n_out)
        what = f"fxnet golden vectors: layer {L.number}, {n} x {L.n_out}"
        add(f"layer{L.number}_acc", acc, L.acc_bits, True, f"{what} accumulators (s_A, {L.acc_bits} b signed)")
        add(f"layer{L.number}_codes", codes, L.out_bits, L.out_signed,
            f"fxnet golden vectors: layer {L.number}, {n} x {L.n_out} output codes "
            f"({L.out_bits} b {'signed' if L.out_signed else 'unsigned'})")  # fmt: skip
        columns += [f"{L.name}_ACC_{j}" for j in range(L.n_out)] + [f"{L.name}_CODE_{j}" for j in range(L.n_out)]
        blocks += [acc, codes]
    dec = arrays["decisions"].reshape(n)
    add("decisions", dec, design.decision_bits, False, f"fxnet golden vectors: {n} decisions")
    columns.append("DECISION")
    blocks.append(dec[:, None])
    texts[FILES["csv"]] = ",".join(columns) + "\n" + (decimal_rows(np.hstack(blocks)) if n else "")
    info["csv"] = {"file": FILES["csv"], "columns": columns, "rows": n}
    return texts, info


# ---------------------------------------------------------------------------------
# manifest
def _layer_manifest(L: LayerDesign) -> dict[str, Any]:
    table = None
    if L.table is not None:
        assert L.table_bits is not None and L.table_frac is not None
        table = {
            "file": L.table_file,
            "entries": int(L.table.size),
            "address_bits": L.table_bits,
            "word_bits": L.out_bits,
            "hex_digits": hex_digits(L.out_bits),
            "signed": L.out_signed,
            "index_frac": L.table_frac,
            "address_offset": -L.index_min,
            "address_layout": _ADDRESS_LAYOUT,
        }
    neurons = []
    for j in range(L.n_out):
        neurons.append(
            {
                "neuron": j,
                "name": f"{L.name}_N{j}",
                "weights": [int(v) for v in L.weights[j].tolist()],
                "bias": int(L.biases[j]),
                "weight_bits": L.weight_bits,
                "acc_bits": L.acc_bits,
                "safe_acc_bits": L.safe_acc_bits[j],
                "shift": L.shift,
                "table_file": L.table_file,
                "address_bits": L.table_bits,
                "word_bits": L.out_bits,
                "signed": L.out_signed,
            }
        )
    return {
        "layer": L.number,
        "name": L.name,
        "activation": L.activation,
        "n_in": L.n_in,
        "n_out": L.n_out,
        "weight": {"bits": L.weight_bits, "frac": L.weight_frac, "signed": True,
                   "format": q_notation(L.weight_bits, L.weight_frac)},
        "accumulator": {"bits": L.acc_bits, "frac": L.acc_frac, "signed": True, "overflow": L.acc_overflow,
                        "format": q_notation(L.acc_bits, L.acc_frac)},
        "bias": {"bits": L.acc_bits, "frac": L.acc_frac, "signed": True,
                 "note": "aligned to the accumulator: added to the sum of products unshifted"},
        "index": {"shift": L.shift, "round": L.index_round, "min": L.index_min, "max": L.index_max,
                  "note": "index = round(acc / 2^shift) (a left shift by -shift when shift < 0), "
                          "then clamped to min..max"},
        "table": table,
        "output": {"bits": L.out_bits, "frac": L.out_frac, "signed": L.out_signed, "min": L.out_min,
                   "max": L.out_max, "format": q_notation(L.out_bits, L.out_frac, L.out_signed)},
        "neurons": neurons,
        "plan": L.plan,
    }  # fmt: skip


def _manifest(network: Network, plan: Plan, design: Design, files: dict[str, bytes], vectors: Any) -> dict[str, Any]:
    roles = {
        FILES["network"]: "network (copy)", FILES["plan"]: "plan (copy)", FILES["vhdl"]: "VHDL-2008 package",
        FILES["verilog"]: "Verilog-2005 include", FILES["c"]: "C header", FILES["csv"]: "golden vectors (CSV)",
    }  # fmt: skip
    entries: list[dict[str, Any]] = [{"file": FILES["manifest"], "role": "manifest (this file)"}]
    for rel in sorted(files):
        role = roles.get(rel) or ("table ($readmemh)" if rel.startswith("tables/") else "golden vectors ($readmemh)")
        entries.append({"file": rel, "role": role, "bytes": len(files[rel]), "sha256": _sha256(files[rel])})
    out = {
        "classes": list(design.classes),
        "class_identifiers": list(design.class_ids),
        "n_outputs": design.n_outputs,
        "decision_bits": design.decision_bits,
    }
    if design.threshold_code is not None:
        out["decision"] = "1 iff the output code >= threshold_code"
        out["threshold"] = design.threshold
        out["threshold_code"] = design.threshold_code
        out["threshold_word"] = design.threshold_word
    else:
        out["decision"] = "argmax of the output codes, ties to the lowest index"
    return {
        "kind": MANIFEST_KIND,
        "version": 1,
        "generator": f"fxnet-widgets {VERSION}",
        "network_digest": network.digest,
        "vhdl_package": VHDL_PACKAGE,
        "files": entries,
        "input": {
            "names": list(design.input_names),
            "identifiers": list(design.input_ids),
            "bits": design.input_bits,
            "frac": design.input_frac,
            "signed": False,
            "scale": network.input_scale,
        },  # fmt: skip
        "layers": [_layer_manifest(L) for L in design.layers],
        "output": out,
        "vectors": vectors,
    }


# ---------------------------------------------------------------------------------
def export(
    network: Network,
    plan: Plan,
    directory: str | os.PathLike[str],
    vectors: Any = None,
    force: bool = False,
) -> ExportResult:
    """Write the hardware hand-off files of ``(network, plan)`` into ``directory``.

    The directory gets ``manifest.json``, a VHDL-2008 package, a Verilog-2005
    include, a C header, one ``$readmemh`` image per table (``tables/``), copies
    of the network and plan files and, with ``vectors``, golden vectors
    (``vectors/``: inputs, every accumulator and code, decisions; hex and CSV).
    Everything is built in a temporary directory beside ``directory`` and
    renamed into place, so a failure leaves no partial directory.

    Parameters
    ----------
    network, plan
        The float network and its fixed-point plan.
    directory
        Target directory; it may be missing or empty. A non-empty directory
        is replaced only with ``force=True`` (atomically: the old one is
        deleted after the new one is in place).
    vectors
        None, an image or ``.npy`` file name, or an array of input codes
        (N x n_in or H x W x n_in).
    force
        Replace a non-empty ``directory``.

    Returns
    -------
    ExportResult

    Examples
    --------
    >>> import tempfile, os
    >>> net = Network.from_layers([([[1.0, 1.0, 1.0]], [-1.0], "sigmoid")])
    >>> plan = Plan.uniform(net, weight_bits=8, weight_frac=5, acc_bits=18,
    ...                     table_bits=10, table_frac=6, out_bits=8)
    >>> d = os.path.join(tempfile.mkdtemp(), "handoff")
    >>> r = export(net, plan, d, vectors=np.array([[0, 0, 0], [255, 128, 7]]))
    >>> r.files[:3]
    ('manifest.json', 'fxnet_design.h', 'fxnet_design.vh')
    >>> read_export(d).layers[0].table.size
    1024
    """
    if not isinstance(network, Network):
        raise TypeError(f"network must be a Network, not {type(network).__name__}")
    if not isinstance(plan, Plan):
        raise TypeError(f"plan must be a Plan, not {type(plan).__name__}")
    if not isinstance(directory, (str, os.PathLike)):
        raise TypeError(f"directory must be a path, not {type(directory).__name__}")
    intnet = build_integer_network(network, plan)
    design = describe(intnet)
    texts: dict[str, str] = {}
    vec_info = None
    n_vectors = None
    if vectors is not None:
        codes, source = _vector_input(network, vectors)
        flat, _ = as_codes(codes, network.input_bits, network.n_in)
        if flat.shape[0] == 0:
            raise ValueError("vectors must hold at least one vector, not 0")
        em = emulate(network, plan, codes)
        n_vectors = em.n
        vtexts, vec_info = _vector_files(design, em)
        vec_info = {"count": em.n, "source": source, "shape": None if em.shape is None else list(em.shape),
                    "order": _ORDER, **vec_info}  # fmt: skip
        texts.update(vtexts)
    banner = [
        f"generated by fxnet-widgets {VERSION} (fxnet export); do not edit",
        f"network digest {network.digest}; the plan is in plan.json",
    ] + [L.describe() for L in intnet.layers]
    texts[FILES["network"]] = dumps_json(network.to_dict())
    texts[FILES["plan"]] = dumps_json(plan.to_dict())
    texts[FILES["vhdl"]] = vhdl_package(design, n_vectors, banner)
    texts[FILES["verilog"]] = verilog_include(design, n_vectors, banner)
    texts[FILES["c"]] = c_header(design, n_vectors, banner)
    for L in design.layers:
        if L.table is not None:
            assert L.table_file is not None
            title = (
                f"fxnet table of layer {L.number} ({L.activation}): {L.table.size} words of {L.out_bits} b "
                f"{'signed' if L.out_signed else 'unsigned'}, address = index + {-L.index_min}"
            )
            texts[L.table_file] = memh_text(L.table, L.out_bits, title)
    data = {rel: text.encode("utf-8") for rel, text in texts.items()}
    manifest = _manifest(network, plan, design, data, vec_info)

    def build(tmp: Path) -> None:
        for rel, blob in sorted(data.items()):
            path = tmp / rel
            path.parent.mkdir(parents=True, exist_ok=True)
            atomic_write_bytes(path, blob)
        atomic_write_bytes(tmp / FILES["manifest"], dumps_json(manifest).encode("utf-8"))

    target = write_directory(directory, build, force=force)
    names = (FILES["manifest"], *sorted(data))
    return ExportResult(target, names, manifest, n_vectors)
