"""Network and plan files fuzzed by the thousand: a correct value or one documented line.

Every generated file is read through the product's loaders (``Network.load``,
``Plan.load``). A case passes when it either

* loads, and the loaded value says exactly what the file says (weights,
  activations, widths, defaults of ``semantics.md``) and survives a save/load
  round trip, or
* raises ``TypeError``/``ValueError``/``FileFormatError`` with a single line that
  starts with the file's name (``architecture.md``, "Errors").

Anything else (another exception, a multi-line message, a silently different
value) fails. Valid plans with extreme widths are then run through the kernel
and checked against the slow contract reference ``tests/_support/fxref.py``.
"""

from __future__ import annotations

import json
import math
import random
from pathlib import Path
from typing import Any

import fxref
import numpy as np
import pytest
from _hardening_support import check_message, count, examples, scratch_dir
from hypothesis import given, note, settings
from hypothesis import strategies as st

import fxnet_widgets as fw
from fxnet_widgets.core.fileio import MAX_JSON_DEPTH, FileFormatError
from fxnet_widgets.core.plan import CHOICES, DEFAULTS, INT_LIMITS, PLAN_FIELDS

WORK = scratch_dir("fxnet-fuzz-docs-")

NET_DOC: dict[str, Any] = {
    "kind": "fxnet.network",
    "version": 1,
    "input": {"names": ["red", "green", "blue"], "bits": 8, "scale": "pow2"},
    "layers": [
        {"weights": [[0.5, -2.0, 3.5], [1, 1, 1], [0, 0, 1]], "bias": [0.2, 0.0, -1.0], "activation": "sigmoid"},
        {"weights": [[1.0, -1.0, 0.5]], "bias": [0.0], "activation": "sigmoid"},
    ],
    "output": {"classes": ["other", "ripe"], "threshold": 0.5},
}
PLAN_LAYER = {"weight_bits": 8, "weight_frac": 5, "acc_bits": 18, "out_bits": 8, "table_bits": 14, "table_frac": 9}
PLAN_DOC: dict[str, Any] = {"kind": "fxnet.plan", "version": 1, "layers": [dict(PLAN_LAYER), dict(PLAN_LAYER)]}
NET = fw.Network.from_dict(NET_DOC)

# -- values a hand-edited file may hold ------------------------------------------------
ODD_NUMBERS = [0, 1, -1, 8, 16, 17, 62, 63, 4096, 4097, 2**31, 2**63, -(2**63) - 1, 10**30, 10**400, -(10**400)]
ODD_STRINGS = ["", "sigmoid", "tanh", "relu", "identity", "pow2", "full", "wrap", "saturate", "half-even", "floor",
               "fxnet.network", "fxnet.plan", "../x", "a/b", "\u202eevil", "名前", "\U0001f34e", "NaN",
               "\ud800"]  # fmt: skip
ODD_FLOATS = [math.nan, math.inf, -math.inf, 1e308, -1e308, 5e-324, -5e-324, 1.5, -0.0, 0.1]


def random_value(rng: random.Random, budget: int = 6) -> Any:
    """A random JSON value: odd numbers and strings, lists and objects (at most ``budget`` deep)."""
    kind = rng.randrange(10 if budget > 0 else 8)
    if kind == 0:
        return None
    if kind == 1:
        return rng.random() < 0.5
    if kind == 2:
        return rng.randint(-(2**70), 2**70) >> rng.randrange(72)
    if kind == 3:
        return rng.choice(ODD_NUMBERS)
    if kind == 4:
        return rng.choice(ODD_FLOATS) if rng.random() < 0.5 else rng.uniform(-1e6, 1e6)
    if kind == 5:
        return "".join(chr(rng.choice([rng.randrange(32, 127), rng.randrange(0x80, 0x3000), rng.randrange(0, 32)]))
                       for _ in range(rng.randrange(8)))  # fmt: skip
    if kind in (6, 7):
        return rng.choice(ODD_STRINGS)
    if kind == 8:
        return [random_value(rng, budget - 1) for _ in range(rng.randrange(5))]
    return {rng.choice(ODD_STRINGS + ["k", "x"]): random_value(rng, budget - 1)
            for _ in range(rng.randrange(4))}  # fmt: skip


class Dup(dict):
    """A JSON object written with its first key twice (only this serializer can)."""


def dump(obj: Any) -> str:
    """JSON text of ``obj``; NaN/inf become the non-standard tokens; ``Dup`` repeats a key."""
    if isinstance(obj, dict):
        items = list(obj.items())
        if isinstance(obj, Dup) and items:
            items.append(items[0])
        return "{" + ", ".join(json.dumps(str(k)) + ": " + dump(v) for k, v in items) + "}"
    if isinstance(obj, list):
        return "[" + ", ".join(dump(v) for v in obj) + "]"
    return json.dumps(obj, allow_nan=True)


def paths(obj: Any, prefix: tuple = ()) -> list[tuple]:
    out = [prefix]
    if isinstance(obj, dict):
        for k, v in obj.items():
            out += paths(v, prefix + (k,))
    elif isinstance(obj, list):
        for i, v in enumerate(obj):
            out += paths(v, prefix + (i,))
    return out


def get(obj: Any, path: tuple) -> Any:
    for p in path:
        obj = obj[p]
    return obj


def nested(depth: int) -> Any:
    v: Any = 1
    for _ in range(depth):
        v = [v]
    return v


def mutated(rng: random.Random, base: dict[str, Any], keys: list[str]) -> tuple[Any, set[str]]:
    """A document derived from ``base`` by 1-4 random edits; returns it and its textual faults."""
    doc: Any = json.loads(json.dumps(base))
    for _ in range(rng.randint(1, 4)):
        path = rng.choice(paths(doc))
        op = rng.choice(["replace", "replace", "delete", "add", "wrap", "dup", "deep", "number"])
        parent_path, last = path[:-1], path[-1] if path else None
        if not path:
            if op == "replace":
                doc = random_value(rng)
            elif op == "dup" and isinstance(doc, dict) and doc:
                doc = Dup(doc)
            continue
        parent = get(doc, parent_path)
        if op == "replace":
            parent[last] = random_value(rng)
        elif op == "number":
            parent[last] = rng.choice(ODD_NUMBERS + ODD_FLOATS)
        elif op == "delete":
            del parent[last]
        elif op == "add":
            target = parent[last]
            if isinstance(target, dict):
                target[rng.choice(keys + ["", "extra", "Weights", "\n", "\u202e"])] = random_value(rng)
            elif isinstance(target, list):
                target.append(random_value(rng))
        elif op == "wrap":
            parent[last] = [parent[last]]
        elif op == "dup" and isinstance(parent[last], dict) and parent[last]:
            parent[last] = Dup(parent[last])
        elif op == "deep":
            parent[last] = nested(rng.randint(1, 2 * MAX_JSON_DEPTH))
    faults = set()
    if has_constant(doc):
        faults.add("NaN or Infinity token")
    if has_dup(doc):
        faults.add("duplicate key")
    if depth(doc) > MAX_JSON_DEPTH:
        faults.add("deep nesting")
    if any(isinstance(v, str) and any(0xD800 <= ord(c) <= 0xDFFF for c in v) for v in walk(doc)):
        faults.add("lone surrogate")
    return doc, faults


def walk(obj: Any):
    """Every key and value of a document."""
    yield obj
    if isinstance(obj, dict):
        for k, v in obj.items():
            yield k
            yield from walk(v)
    elif isinstance(obj, list):
        for v in obj:
            yield from walk(v)


def has_constant(obj: Any) -> bool:
    if isinstance(obj, float):
        return not math.isfinite(obj)
    if isinstance(obj, dict):
        return any(has_constant(v) for v in obj.values())
    if isinstance(obj, list):
        return any(has_constant(v) for v in obj)
    return False


def write(name: str, text: str) -> Path:
    path = WORK / name
    path.write_text(text, encoding="utf-8", errors="surrogatepass")
    return path


def has_dup(obj: Any) -> bool:
    if isinstance(obj, Dup) and obj:
        return True
    if isinstance(obj, dict):
        return any(has_dup(v) for v in obj.values())
    if isinstance(obj, list):
        return any(has_dup(v) for v in obj)
    return False


def depth(obj: Any) -> int:
    if isinstance(obj, dict):
        return 1 + max((depth(v) for v in obj.values()), default=0)
    if isinstance(obj, list):
        return 1 + max((depth(v) for v in obj), default=0)
    return 0


def check_network_is_the_file(net: fw.Network, doc: dict[str, Any]) -> None:
    """The loaded network holds exactly what the file says (defaults of semantics.md)."""
    inp = doc.get("input", {})
    assert net.input_bits == inp.get("bits", 8) and net.input_scale == inp.get("scale", "pow2")
    assert len(net.layers) == len(doc["layers"])
    for L, ld in zip(net.layers, doc["layers"]):
        assert L.activation == ld["activation"]
        np.testing.assert_array_equal(L.weights, np.array(ld["weights"], dtype=np.float64))
        np.testing.assert_array_equal(L.bias, np.array(ld["bias"], dtype=np.float64))
    if inp.get("names") is not None:
        assert list(net.input_names) == list(inp["names"])
    out = doc.get("output", {})
    if out.get("classes") is not None:
        assert list(net.classes) == list(out["classes"])
    assert net.threshold == float(out.get("threshold", 0.5))
    again = write("again.json", "")
    net.save(again)
    assert fw.Network.load(again) == net


NET_KEYS = ["kind", "version", "input", "layers", "output", "names", "bits", "scale", "weights", "bias", "activation",
            "classes", "threshold"]  # fmt: skip


@settings(max_examples=examples(2500))
@given(st.randoms(use_true_random=True))
def test_fuzzed_network_files(rng):
    count("network files")
    doc, faults = mutated(rng, NET_DOC, NET_KEYS)
    text = dump(doc)
    note(text)
    path = write("net.json", text)
    try:
        net = fw.Network.load(path)
    except Exception as exc:  # noqa: BLE001 - the checks below decide
        msg = check_message(exc, f"{path}: ")
        if faults:
            # non-standard constants, duplicate keys and deep nesting are refused by the reader itself
            assert isinstance(exc, FileFormatError), msg
        return
    assert not faults, f"a file with {faults} was accepted"
    check_network_is_the_file(net, doc)


def check_plan_is_the_file(plan: fw.Plan, doc: dict[str, Any]) -> None:
    assert len(plan.layers) == len(doc["layers"])
    for lp, ld in zip(plan.layers, doc["layers"]):
        for name in PLAN_FIELDS:
            want = ld.get(name, DEFAULTS.get(name))
            got = getattr(lp, name)
            assert got == want and type(got) is type(want), (name, got, want)
    again = write("again-plan.json", "")
    plan.save(again)
    assert fw.Plan.load(again) == plan


@settings(max_examples=examples(2500))
@given(st.randoms(use_true_random=True))
def test_fuzzed_plan_files(rng):
    count("plan files")
    doc, faults = mutated(rng, PLAN_DOC, ["kind", "version", "layers", *PLAN_FIELDS, "acc_bit"])
    text = dump(doc)
    note(text)
    path = write("plan.json", text)
    try:
        plan = fw.Plan.load(path, NET)
    except Exception as exc:  # noqa: BLE001
        msg = check_message(exc, f"{path}: ")
        if faults:
            assert isinstance(exc, FileFormatError), msg
        return
    assert not faults, f"a file with {faults} was accepted"
    check_plan_is_the_file(plan, doc)


# -- valid plans at the contract's limits, through the kernel --------------------------
def field(name: str) -> st.SearchStrategy[int]:
    lo, hi = INT_LIMITS[name]
    return st.one_of(st.sampled_from([lo, hi]), st.integers(lo, hi))


@st.composite
def extreme_case(draw: st.DrawFn) -> tuple[dict, dict, list[list[int]]]:
    bits = draw(st.sampled_from([1, 8, 16]))
    acts = draw(st.lists(st.sampled_from(["sigmoid", "tanh", "relu", "identity"]), min_size=1, max_size=2))
    weight = st.one_of(st.floats(-1e6, 1e6, allow_nan=False), st.sampled_from([1e308, -1e308, 0.0, 5e-324, 0.5]))
    layers, plans, n_in = [], [], draw(st.integers(1, 3))
    for act in acts:
        n_out = draw(st.integers(1, 2))
        layers.append({
            "weights": draw(st.lists(st.lists(weight, min_size=n_in, max_size=n_in), min_size=n_out, max_size=n_out)),
            "bias": draw(st.lists(weight, min_size=n_out, max_size=n_out)),
            "activation": act,
        })  # fmt: skip
        lp = {k: draw(field(k)) for k in ("weight_bits", "weight_frac", "acc_bits", "out_bits")}
        lp["table_bits"] = draw(st.integers(1, 12))  # 2^20 entries are legal, but slow to build 800 times
        lp["table_frac"] = draw(field("table_frac"))
        if act in ("relu", "identity"):
            del lp["table_bits"], lp["table_frac"]
            lp["out_frac"] = draw(field("out_frac"))
        for name, choices in CHOICES.items():
            if draw(st.booleans()) and name != "table_sample":  # "mid" is slow in the reference; tests/core covers it
                lp[name] = draw(st.sampled_from(choices))
        plans.append(lp)
        n_in = n_out
    net_doc = {"input": {"bits": bits}, "layers": layers}
    n0 = len(layers[0]["weights"][0])
    codes = draw(st.lists(st.lists(st.integers(0, (1 << bits) - 1), min_size=n0, max_size=n0), min_size=1, max_size=3))
    return net_doc, {"layers": plans}, codes


@settings(max_examples=examples(500))
@given(extreme_case())
def test_extreme_widths_match_the_contract_or_are_refused(case):
    count("extreme plans through the kernel")
    net_doc, plan_doc, codes = case
    net = fw.Network.from_dict(net_doc)
    plan = fw.Plan.from_dict(plan_doc)
    try:
        result = fw.emulate(net, plan, np.array(codes, dtype=np.int64))
    except ValueError as exc:
        # the only refusal the contract allows here: the int64-safety proof (semantics.md, step 3)
        assert "does not fit in int64" in check_message(exc), exc
        return
    # the slow reference of the contract, written with Python ints and Fractions (tests/_support/fxref.py)
    ref = fxref.run(net.to_dict(), plan.to_dict(), codes)
    for li, L in enumerate(ref["layers"]):
        assert result.acc[li].tolist() == L["acc"], f"acc of layer {li + 1}"
        assert result.codes[li].tolist() == L["codes"], f"codes of layer {li + 1}"
        for name in ("acc_overflow", "table_low", "table_high"):
            assert result.events[li][name].tolist() == L["events"][name], f"{name} of layer {li + 1}"
        assert result.events[li]["weight_clip"].tolist() == L["weight_clip"]
    assert result.decisions.tolist() == ref["decisions"]


@pytest.mark.parametrize("depth_", [MAX_JSON_DEPTH + 1, 10_000, 1_000_000])
def test_deep_nesting_is_refused_quickly(depth_):
    path = write("deep.json", "[" * depth_ + "]" * depth_)
    with pytest.raises(FileFormatError, match=rf"^{path}: JSON nesting deeper than {MAX_JSON_DEPTH} levels$"):
        fw.Network.load(path)


def test_number_beyond_float64_is_refused():
    # 1e999 overflows IEEE 754 binary64 (max about 1.8e308: IEEE 754-2019, table 3.5)
    path = write("inf.json", '{"layers": [{"weights": [[1e999]], "bias": [0], "activation": "relu"}]}')
    msg = rf"^{path}: 1e999 is out of the float64 range \(numbers must be finite\)$"
    with pytest.raises(FileFormatError, match=msg):
        fw.Network.load(path)


def test_integer_beyond_float64_is_refused():
    path = write("big.json", json.dumps({"layers": [{"weights": [[10**400]], "bias": [0], "activation": "relu"}]}))
    with pytest.raises(ValueError, match=rf"^{path}: layers\[0\]\.weights\[0\]\[0\] must be finite, not 1000+\.\.\.$"):
        fw.Network.load(path)
