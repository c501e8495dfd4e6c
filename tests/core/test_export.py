"""The hand-off export: files, round trip, identifiers, atomic directory."""

from __future__ import annotations

import hashlib
import os
import re
import sys
from pathlib import Path

import numpy as np
import pytest

sys.path.insert(0, str(Path(__file__).resolve().parents[1] / "hdl"))
from fxnet_random_designs import demo_design, extreme_designs, random_design  # noqa: E402

import fxnet_widgets  # noqa: E402
from fxnet_widgets.core.export import (  # noqa: E402
    KEYWORDS,
    _api,  # noqa: E402
    _directory,  # noqa: E402
    export,
    is_identifier,
    memh_text,
    parse_memh,
    read_export,
    sanitise,
    unique_identifiers,
)
from fxnet_widgets.core.fileio import FileFormatError  # noqa: E402
from fxnet_widgets.core.images import save_png  # noqa: E402
from fxnet_widgets.core.kernel import build_integer_network, emulate  # noqa: E402
from fxnet_widgets.core.network import Network  # noqa: E402
from fxnet_widgets.core.plan import Plan  # noqa: E402


def _small():
    net = Network.from_layers(
        [([[2.0, -3.0, 1.0], [1.0, 1.0, -2.0]], [0.1, -0.5], "tanh"), ([[1.0, -2.0]], [-0.3], "sigmoid")]
    )
    plan = Plan.uniform(net, weight_bits=8, weight_frac=5, acc_bits=18, table_bits=6, table_frac=3, out_bits=5)
    return net, plan


def _listing(root: Path) -> set[str]:
    return {p.relative_to(root).as_posix() for p in root.rglob("*") if p.is_file()}


# ---------------------------------------------------------------------------------
# round trip
ROUND_TRIP = {f"random-{s}": random_design(s, 50) for s in range(0, 24, 3)} | extreme_designs()


@pytest.mark.parametrize("case", sorted(ROUND_TRIP))
def test_round_trip_reproduces_the_integer_network(tmp_path: Path, case: str) -> None:
    net, plan, codes = ROUND_TRIP[case]
    export(net, plan, tmp_path / "out", vectors=codes)
    back = read_export(tmp_path / "out")
    intnet = build_integer_network(net, plan)
    assert len(back.layers) == len(intnet.layers)
    for got, want in zip(back.layers, intnet.layers):
        np.testing.assert_array_equal(got.weights, want.q_w)
        np.testing.assert_array_equal(got.biases, want.q_b)
        assert got.shift == want.shift
        assert (got.index_min, got.index_max) == (want.index_min, want.index_max)
        assert (got.out_min, got.out_max, got.out_signed, got.out_frac) == (
            want.out_min, want.out_max, want.out_signed, want.out_frac,
        )  # fmt: skip
        assert (got.acc_bits, got.acc_overflow, got.index_round) == (
            want.plan.acc_bits, want.plan.acc_overflow, want.plan.index_round,
        )  # fmt: skip
        if want.table is None:
            assert got.table is None
        else:
            np.testing.assert_array_equal(got.table, want.table)
    assert back.threshold_code == intnet.threshold_code
    em = emulate(net, plan, codes)
    arrays = em.npz_arrays()
    np.testing.assert_array_equal(back.vectors["inputs"], em.inputs)
    np.testing.assert_array_equal(back.vectors["decisions"][:, 0], arrays["decisions"])
    for li in range(len(intnet.layers)):
        np.testing.assert_array_equal(back.vectors[f"layer{li + 1}_acc"], arrays[f"acc_{li + 1}"])
        np.testing.assert_array_equal(back.vectors[f"layer{li + 1}_codes"], arrays[f"codes_{li + 1}"])
    # the copies of the inputs load back to equal values
    assert Network.load(tmp_path / "out" / "network.json") == net
    assert Plan.load(tmp_path / "out" / "plan.json", net) == plan


def test_csv_matches_the_memory_images(tmp_path: Path) -> None:
    net, plan, codes, _ = demo_design(100, use_assets=False)
    export(net, plan, tmp_path / "out", vectors=codes)
    back = read_export(tmp_path / "out")
    lines = (tmp_path / "out" / "vectors" / "golden.csv").read_text().splitlines()
    assert lines[0] == (
        "sample,IN_RED,IN_GREEN,IN_BLUE,L1_ACC_0,L1_ACC_1,L1_ACC_2,L1_CODE_0,L1_CODE_1,L1_CODE_2,"
        "L2_ACC_0,L2_CODE_0,DECISION"
    )
    table = np.array([[int(v) for v in line.split(",")] for line in lines[1:]])
    assert table.shape == (100, 13)
    np.testing.assert_array_equal(table[:, 0], np.arange(100))
    np.testing.assert_array_equal(table[:, 1:4], back.vectors["inputs"])
    np.testing.assert_array_equal(table[:, 4:7], back.vectors["layer1_acc"])
    np.testing.assert_array_equal(table[:, 7:10], back.vectors["layer1_codes"])
    np.testing.assert_array_equal(table[:, 10], back.vectors["layer2_acc"][:, 0])
    np.testing.assert_array_equal(table[:, 12], back.vectors["decisions"][:, 0])


# ---------------------------------------------------------------------------------
# manifest and file formats
def test_manifest_lists_every_file_with_its_hash(tmp_path: Path) -> None:
    net, plan = _small()
    r = export(net, plan, tmp_path / "out", vectors=np.array([[0, 0, 0], [255, 1, 128]]))
    m = r.manifest
    names = [e["file"] for e in m["files"]]
    assert set(names) == _listing(tmp_path / "out") == set(r.files)
    for e in m["files"]:
        if e["file"] != "manifest.json":
            data = (tmp_path / "out" / e["file"]).read_bytes()
            assert (e["bytes"], e["sha256"]) == (len(data), hashlib.sha256(data).hexdigest())
    L1 = m["layers"][0]
    assert L1["table"]["address_bits"] == 6 and L1["table"]["word_bits"] == 5 and L1["table"]["signed"] is True
    assert L1["table"]["address_offset"] == 32  # offset binary: address = index + 2^(T-1) (semantics.md step 5)
    assert L1["plan"] == plan.layers[0].to_dict()
    n0 = L1["neurons"][0]
    assert n0["weights"] == build_integer_network(net, plan).layers[0].q_w[0].tolist()
    assert (n0["table_file"], n0["shift"], n0["acc_bits"]) == ("tables/layer1_table.memh", 5 + 8 - 3, 18)


def test_table_image_format(tmp_path: Path) -> None:
    net, plan = _small()
    export(net, plan, tmp_path / "out")
    lines = (tmp_path / "out" / "tables" / "layer1_table.memh").read_text().splitlines()
    table = build_integer_network(net, plan).layers[0].table
    # IEEE 1364-2005 17.2.9: // comments allowed; one hex word per line in address order
    assert lines[0].startswith("// fxnet table of layer 1 (tanh): 64 words of 5 b signed")
    assert len(lines) == 1 + 64
    assert all(len(w) == 2 for w in lines[1:])  # ceil(5 / 4) hex digits
    # two's complement bit pattern of the 5-bit word (common practice): -16 -> 0x10, -1 -> 0x1f
    assert lines[1] == f"{int(table[0]) & 31:02x}" and int(table[0]) == -16
    assert [int(w, 16) - (32 if int(w, 16) >= 16 else 0) for w in lines[1:]] == table.tolist()


def test_memh_text_and_parse() -> None:
    assert memh_text(np.array([-1, 5, -128]), 8, "t") == "// t\nff\n05\n80\n"
    assert memh_text(np.array([1]), 13, "t") == "// t\n0001\n"  # ceil(13 / 4) = 4 digits
    # IEEE 1364-2005 17.2.9: white space, // and /* */ comments, @address
    text = "/* head\n */ 01 02 // two\n@4 7f\n@2 03\n04\n"
    assert parse_memh(text, 8, signed=True, where="m").tolist() == [1, 2, 3, 4, 127]
    with pytest.raises(ValueError, match=r"^m: line 1: word must fit in 4 bits, not '1f'$"):
        parse_memh("1f\n", 4, signed=False, where="m")
    with pytest.raises(ValueError, match=r"^m: line 2: word must be hex digits, not 'x1'$"):
        parse_memh("00\nx1\n", 8, signed=False, where="m")
    with pytest.raises(ValueError, match=r"^m: address 0x1 has no word$"):
        parse_memh("00\n@2 01\n", 8, signed=False, where="m")
    with pytest.raises(ValueError, match=r"^m: must hold 3 words, not 2$"):
        parse_memh("00\n01\n", 8, signed=False, where="m", words=3)
    with pytest.raises(ValueError, match=r"^word must fit in 4 bits, not 16$"):
        memh_text(np.array([16]), 4, "t")


def test_read_export_detects_a_changed_file(tmp_path: Path) -> None:
    net, plan = _small()
    export(net, plan, tmp_path / "out")
    path = tmp_path / "out" / "tables" / "layer2_table.memh"
    lines = path.read_text().splitlines()
    lines[1] = f"{int(lines[1], 16) ^ 1:02x}"
    path.write_text("\n".join(lines) + "\n")
    with pytest.raises(
        FileFormatError, match=r"layer2_table\.memh: the file differs from the one the manifest lists \(sha256\)$"
    ):
        read_export(tmp_path / "out")
    assert read_export(tmp_path / "out", check_hashes=False).layers[1].table is not None


# ---------------------------------------------------------------------------------
# identifiers
def test_sanitise_and_keywords() -> None:
    # reserved words: IEEE 1076-2008 15.10, IEEE 1364-2005 annex B, ISO C 6.4.1 (from the standards)
    for word in ("signal", "entity", "downto", "module", "wire", "reg", "int", "static", "while"):
        assert word in KEYWORDS
        assert sanitise(word) == word.upper() + "_ID"
    assert sanitise("Signal") == "SIGNAL_ID"  # VHDL does not tell case apart
    assert sanitise("ripe  fruit!") == "RIPE_FRUIT"
    assert sanitise("__a__b__") == "A_B"  # VHDL: no leading, trailing or doubled underscore
    assert sanitise("grün") == "GR_N"
    assert sanitise("7up") == "N_7UP"
    assert sanitise("") == sanitise("!!") == "ID"
    assert unique_identifiers(["red", "Red", "RED", "red_2"]) == ["RED", "RED_2", "RED_3", "RED_2_2"]
    assert not is_identifier("A__B") and not is_identifier("_A") and not is_identifier("SIGNAL")
    with pytest.raises(TypeError, match=r"^name must be a string, not 3$"):
        sanitise(3)  # type: ignore[arg-type]


def test_every_generated_name_is_a_valid_identifier(tmp_path: Path) -> None:
    net, plan, codes = extreme_designs()["argmax-ties"]  # inputs "signal", "Signal", "3d"
    export(net, plan, tmp_path / "out", vectors=codes)
    names = set()
    for f in ("fxnet_design_pkg.vhd", "fxnet_design.vh", "fxnet_design.h"):
        names |= set(re.findall(r"\bFXNET_[A-Za-z0-9_]*", (tmp_path / "out" / f).read_text()))
    assert {"FXNET_IN_SIGNAL_ID", "FXNET_IN_SIGNAL_ID_2", "FXNET_IN_N_3D", "FXNET_CLASS_RIPE_FRUIT"} <= names
    assert all(is_identifier(n) for n in names), sorted(n for n in names if not is_identifier(n))


# ---------------------------------------------------------------------------------
# the directory: refusal, force, crash
def test_refuses_a_non_empty_directory(tmp_path: Path) -> None:
    net, plan = _small()
    d = tmp_path / "out"
    d.mkdir()
    (d / "keep.txt").write_text("mine")
    with pytest.raises(
        FileExistsError, match=r"out: the directory is not empty \(use force=True or --force to replace it\)$"
    ):
        export(net, plan, d)
    assert _listing(d) == {"keep.txt"}
    assert sorted(os.listdir(tmp_path)) == ["out"]


def test_empty_directory_is_filled_and_force_replaces(tmp_path: Path) -> None:
    net, plan = _small()
    d = tmp_path / "out"
    d.mkdir()
    export(net, plan, d)
    assert "manifest.json" in _listing(d)
    (d / "extra.txt").write_text("old")
    r = export(net, plan, d, vectors=np.zeros((3, 3), dtype=np.uint8), force=True)
    assert "extra.txt" not in _listing(d) and r.n_vectors == 3
    assert sorted(os.listdir(tmp_path)) == ["out"]  # nothing left beside it


@pytest.mark.parametrize("force", [False, True])
def test_crash_mid_export_leaves_no_partial_directory(tmp_path: Path, monkeypatch, force: bool) -> None:
    net, plan = _small()
    d = tmp_path / "out"
    if force:
        export(net, plan, d)
        before = {p: (d / p).read_bytes() for p in _listing(d)}
    real = _api.atomic_write_bytes
    calls = []

    def failing(path, data):
        calls.append(path)
        if len(calls) == 4:
            raise RuntimeError("disk on fire")
        return real(path, data)

    monkeypatch.setattr(_api, "atomic_write_bytes", failing)
    with pytest.raises(RuntimeError, match=r"^disk on fire$"):
        export(net, plan, d, force=force)
    assert len(calls) == 4
    if force:
        assert {p: (d / p).read_bytes() for p in _listing(d)} == before
        assert sorted(os.listdir(tmp_path)) == ["out"]
    else:
        assert os.listdir(tmp_path) == []


def test_failed_rename_puts_the_old_directory_back(tmp_path: Path, monkeypatch) -> None:
    net, plan = _small()
    d = tmp_path / "out"
    export(net, plan, d)
    before = {p: (d / p).read_bytes() for p in _listing(d)}

    def failing_replace(src, dst):
        raise OSError("rename refused")

    monkeypatch.setattr(_directory.os, "replace", failing_replace)
    with pytest.raises(OSError, match=r"^rename refused$"):
        export(net, plan, d, vectors=np.zeros((2, 3), dtype=np.uint8), force=True)
    assert {p: (d / p).read_bytes() for p in _listing(d)} == before
    assert sorted(os.listdir(tmp_path)) == ["out"]


def test_bad_targets_and_arguments(tmp_path: Path) -> None:
    net, plan = _small()
    (tmp_path / "file").write_text("x")
    with pytest.raises(ValueError, match=r"file: must be a directory, not a file$"):
        export(net, plan, tmp_path / "file")
    with pytest.raises(ValueError, match=r"nowhere/out: the directory .*nowhere does not exist$"):
        export(net, plan, tmp_path / "nowhere" / "out")
    (tmp_path / "real").mkdir()
    os.symlink(tmp_path / "real", tmp_path / "link")
    with pytest.raises(ValueError, match=r"link: must be a directory, not a symbolic link$"):
        export(net, plan, tmp_path / "link")
    with pytest.raises(TypeError, match=r"^plan must be a Plan, not str$"):
        export(net, "plan.json", tmp_path / "out")  # type: ignore[arg-type]
    with pytest.raises(TypeError, match=r"^network must be a Network, not dict$"):
        export({}, plan, tmp_path / "out")  # type: ignore[arg-type]
    with pytest.raises(TypeError, match=r"^vectors must be None, a file name or an array of codes, not list$"):
        export(net, plan, tmp_path / "out", vectors=[[0, 0, 0]])
    with pytest.raises(TypeError, match=r"^force must be True or False, not 1$"):
        export(net, plan, tmp_path / "out", force=1)  # type: ignore[arg-type]
    with pytest.raises(ValueError, match=r"^codes must be between 0 and 255 \(8-bit unsigned\), not 256$"):
        export(net, plan, tmp_path / "out", vectors=np.array([[256, 0, 0]]))
    with pytest.raises(ValueError, match=r"^vectors must hold at least one vector, not 0$"):
        export(net, plan, tmp_path / "out", vectors=np.zeros((0, 3), dtype=np.uint8))
    assert sorted(os.listdir(tmp_path)) == ["file", "link", "real"]


def test_vectors_from_files(tmp_path: Path) -> None:
    net, plan = _small()
    img = np.arange(4 * 5 * 3, dtype=np.uint8).reshape(4, 5, 3)
    save_png(tmp_path / "scene.png", img)
    r = fxnet_widgets.export(net, plan, tmp_path / "a", vectors=tmp_path / "scene.png")
    assert r.n_vectors == 20 and r.manifest["vectors"]["shape"] == [4, 5]
    np.testing.assert_array_equal(read_export(tmp_path / "a").vectors["inputs"], img.reshape(-1, 3))
    np.save(tmp_path / "codes.npy", img.reshape(-1, 3)[:7])
    r = export(net, plan, tmp_path / "b", vectors=str(tmp_path / "codes.npy"))
    assert r.n_vectors == 7 and r.manifest["vectors"]["source"] == "codes file codes.npy"
    np.save(tmp_path / "flat.npy", np.zeros(3, dtype=np.uint8))
    with pytest.raises(ValueError, match=r"flat\.npy: codes must be N x 3, not shape \(3,\)$"):
        export(net, plan, tmp_path / "c", vectors=str(tmp_path / "flat.npy"))
    np.save(tmp_path / "big.npy", np.full((2, 3), 300))
    with pytest.raises(ValueError, match=r"big\.npy: codes must be between 0 and 255 \(8-bit unsigned\), not 300$"):
        export(net, plan, tmp_path / "e", vectors=str(tmp_path / "big.npy"))
    one = Network.from_layers([([[1.0]], [0.0], "sigmoid")], input_names=["x"])
    one_plan = Plan.uniform(one, weight_bits=4, weight_frac=2, acc_bits=12, out_bits=4, table_bits=4, table_frac=2)
    with pytest.raises(
        ValueError, match=r"scene\.png: an image gives 3 inputs of 8 bits, but the network has 1 inputs of 8 bits"
    ):
        export(one, one_plan, tmp_path / "d", vectors=tmp_path / "scene.png")


def test_decimal_rows_matches_numpy_savetxt() -> None:
    import io

    from fxnet_widgets.core.export._api import decimal_rows

    rng = np.random.default_rng(5)
    for scale in (1, 9, 10, 99_999, 2**31, 10**18):
        m = rng.integers(-scale, scale + 1, (40, 4), dtype=np.int64)
        m[0, :2] = [scale, -scale]
        ref = io.StringIO()
        np.savetxt(ref, m, fmt="%d", delimiter=",")  # reference: numpy.savetxt with printf-style "%d"
        assert decimal_rows(m, chunk=16) == ref.getvalue()
    with pytest.raises(ValueError, match=r"^matrix must be a non-empty 2-D array, not shape \(3,\)$"):
        decimal_rows(np.zeros(3, dtype=np.int64))
