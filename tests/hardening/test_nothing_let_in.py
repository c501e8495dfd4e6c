"""Nothing let in: no pickle or code execution, bounded JSON, escaped HTML, export stays home.

* The package source never unpickles, unmarshals or evaluates (an AST scan of
  every module: ``pickle``/``marshal``/``shelve`` imports, ``eval``/``exec``
  calls, ``yaml.load``, ``np.load`` without ``allow_pickle=False``) and reads
  JSON only through the bounded reader of ``core/fileio.py``.
* JSON files are bounded in size (checked before reading) and nesting.
* The report escapes every user text: hostile input names, class names and
  titles leave the page's element structure exactly as benign ones do, and no
  HTML widget carries them raw.
* Export writes nothing outside its target directory, whatever the names.
"""

from __future__ import annotations

import ast
import html.parser
import json
import re
from pathlib import Path

import numpy as np
import pytest
from _hardening_support import check_message, count, examples, scratch_dir
from hypothesis import given, settings
from hypothesis import strategies as st

import fxnet_widgets as fw
from fxnet_widgets.core.fileio import MAX_JSON_BYTES, FileFormatError, load_json

PACKAGE = Path(fw.__file__).resolve().parent
WORK = scratch_dir("fxnet-let-in-")
FORBIDDEN_MODULES = {"pickle", "cPickle", "_pickle", "marshal", "shelve", "dill", "cloudpickle", "joblib"}


def modules() -> list[Path]:
    return sorted(PACKAGE.rglob("*.py"))


def test_the_scan_sees_the_whole_package():
    names = {p.relative_to(PACKAGE).as_posix() for p in modules()}
    assert {"core/kernel/build.py", "core/fileio.py", "cli/_common.py"} <= names and len(names) >= 20


@pytest.mark.parametrize("path", modules(), ids=lambda p: p.relative_to(PACKAGE).as_posix())
def test_no_pickle_no_eval_no_unbounded_json(path):
    tree = ast.parse(path.read_text(encoding="utf-8"), filename=str(path))
    where = path.relative_to(PACKAGE).as_posix()
    for node in ast.walk(tree):
        if isinstance(node, ast.Import):
            bad = {a.name.split(".")[0] for a in node.names} & FORBIDDEN_MODULES
            assert not bad, f"{where}:{node.lineno} imports {bad}"
        elif isinstance(node, ast.ImportFrom) and node.module:
            assert node.module.split(".")[0] not in FORBIDDEN_MODULES, f"{where}:{node.lineno} imports {node.module}"
        elif isinstance(node, ast.Call):
            func = node.func
            if isinstance(func, ast.Name):
                assert func.id not in ("eval", "exec"), f"{where}:{node.lineno} calls {func.id}"
            if not isinstance(func, ast.Attribute):
                continue
            owner = func.value.id if isinstance(func.value, ast.Name) else None
            kwargs = {k.arg: k.value for k in node.keywords}
            if owner in ("np", "numpy") and func.attr == "load":
                flag = kwargs.get("allow_pickle")
                assert isinstance(flag, ast.Constant) and flag.value is False, f"{where}:{node.lineno} np.load"
            if owner == "yaml":
                assert func.attr not in ("load", "load_all", "unsafe_load"), f"{where}:{node.lineno} yaml.{func.attr}"
            if owner == "json" and func.attr in ("load", "loads") and where != "core/fileio.py":
                # JSON from files goes through fileio.load_json (size, depth, duplicates, NaN all bounded)
                pytest.fail(f"{where}:{node.lineno} json.{func.attr} outside core/fileio.py")
        elif isinstance(node, ast.keyword) and node.arg == "allow_pickle":
            assert isinstance(node.value, ast.Constant) and node.value.value is False, f"{where}: allow_pickle"


def test_oversized_json_is_refused_before_reading(tmp_path):
    path = tmp_path / "huge.json"
    with open(path, "wb") as fh:  # a sparse file: its size is claimed, not written
        fh.truncate(MAX_JSON_BYTES + 1)
    want = f"{path}: file is {MAX_JSON_BYTES + 1} bytes, more than the limit of {MAX_JSON_BYTES}"
    with pytest.raises(FileFormatError, match=f"^{re.escape(want)}$"):
        load_json(path)
    with pytest.raises(FileFormatError, match=f"^{re.escape(want)}$"):
        fw.Network.load(path)
    with pytest.raises(FileFormatError, match=f"^{re.escape(want)}$"):
        fw.Plan.load(path)


@settings(max_examples=examples(300))
@given(st.integers(1, 200), st.sampled_from(["[", "{\"a\":"]), st.booleans())
def test_nesting_bound_counts_brackets_not_strings(levels, opener, in_string):
    count("JSON nesting")
    closer = "]" if opener == "[" else "}"
    body = opener * levels + "1" + closer * levels
    text = json.dumps(body) if in_string else body  # brackets inside a string do not nest
    path = WORK / "nest.json"
    path.write_text(text)
    try:
        got = load_json(path)
    except FileFormatError as exc:
        check_message(exc, f"{path}: ")
        assert not in_string and levels > 64
        return
    assert in_string or levels <= 64
    assert got == (body if in_string else json.loads(text))


# -- the report escapes user text --------------------------------------------------------------
HOSTILE = '<script>alert("x")</script><img src=x onerror=alert(1)>&amp;\'"'


class _Structure(html.parser.HTMLParser):
    def __init__(self) -> None:
        super().__init__(convert_charrefs=True)
        self.tags: list[tuple[str, tuple[str, ...]]] = []
        self.scripts: list[str] = []
        self._in: str | None = None

    def handle_starttag(self, tag, attrs):
        self.tags.append((tag, tuple(sorted(k for k, _ in attrs))))
        self._in = dict(attrs).get("type", "") if tag == "script" else None

    def handle_data(self, data):
        if self._in is not None and self._in.startswith("application/vnd.jupyter"):
            self.scripts.append(data)

    def handle_endtag(self, tag):
        self._in = None


def _report(names: list[str], classes: list[str], title: str) -> str:
    report = pytest.importorskip("fxnet_widgets.report")
    from fxnet_widgets.widgets.explorer import Explorer

    net = fw.Network.from_layers([([[4.0, -4.0, 1.0]], [0.0], "sigmoid")], input_names=names, classes=classes)
    img = np.random.default_rng(5).integers(0, 256, (6, 8, 3), dtype=np.uint8)
    ex = Explorer(net, image=img)
    return report.report_html(ex.session, widget=ex, title=title)


def test_report_escapes_every_user_text():
    benign = "A" * len(HOSTILE)
    good = _Structure()
    good.feed(_report([benign + "r", benign + "g", benign + "b"], [benign + "0", benign + "1"], benign))
    bad = _Structure()
    page = _report([HOSTILE + "r", HOSTILE + "g", HOSTILE + "b"], [HOSTILE + "0", HOSTILE + "1"], HOSTILE)
    bad.feed(page)
    # hostile text changes no element of the page (HTML Living Standard, 13.2: text is data once escaped)
    assert bad.tags == good.tags
    assert "&lt;script&gt;alert(" in page
    for blob in bad.scripts:
        if not blob.strip().startswith("{"):
            continue
        state = json.loads(blob.replace("<\\/", "</"))
        for model in state.get("state", {}).values():
            if model.get("model_name") in ("HTMLModel", "HTMLMathModel"):
                value = model.get("state", {}).get("value", "")
                # an HTML widget's value becomes markup in the browser: user text must arrive escaped
                assert "<script" not in value and "<img" not in value, value[:200]


# -- export stays inside its directory ---------------------------------------------------------
TRAVERSALS = ["../x", "../../etc/passwd", "/abs/path", "..\\win", "a/../../b", ".", "..", "~", "con", "nul.txt",
              "x\x00y", "\u202e", "名前", "", " "]  # fmt: skip


def _export_into(tmp_path: Path, names: list[str], classes: list[str]) -> Path:
    from fxnet_widgets.core.export import export

    net = fw.Network.from_layers([([[1.0, -1.0, 0.5]], [0.0], "sigmoid")], input_names=names, classes=classes)
    plan = fw.Plan.uniform(net, weight_bits=8, weight_frac=5, acc_bits=18, out_bits=8, table_bits=6, table_frac=3)
    target = tmp_path / "deep" / "hdl"
    target.parent.mkdir(parents=True, exist_ok=True)
    codes = np.random.default_rng(0).integers(0, 256, (4, 3), dtype=np.uint8)
    export(net, plan, target, vectors=codes, force=True)
    return target


def _outside(tmp_path: Path, target: Path) -> list[str]:
    return [str(p) for p in tmp_path.rglob("*") if p != target.parent and target not in (p, *p.parents)]


@pytest.mark.parametrize("bad", TRAVERSALS)
def test_export_never_writes_outside_its_directory(tmp_path, bad):
    try:
        target = _export_into(tmp_path, [bad, bad + "g", "b"], [bad, bad + "1"])
    except (TypeError, ValueError) as exc:  # refusing a name is fine, with one line
        check_message(exc)
        assert _outside(tmp_path, tmp_path / "deep" / "hdl") == []
        return
    assert _outside(tmp_path, target) == []
    for p in target.rglob("*"):
        assert ".." not in p.relative_to(target).parts


@settings(max_examples=examples(40))
@given(st.lists(st.text(min_size=1, max_size=12), min_size=5, max_size=5))
def test_export_with_random_names_stays_inside(tmp_path_factory, names):
    count("export names")
    tmp = tmp_path_factory.mktemp("export")
    try:
        target = _export_into(tmp, names[:3], names[3:])
    except (TypeError, ValueError) as exc:
        check_message(exc)
        return
    assert _outside(tmp, target) == []
