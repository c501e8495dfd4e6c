"""The command line fuzzed in-process: exit 0 with good output, or exit 2 with exactly one line.

``fxnet_widgets.cli.main`` is called with random argument lists built from every
subcommand's flags, real and broken files, odd numbers and random text
(NUL bytes, unicode). Subcommands that do heavy work (training, sweeps) only get
output paths in a directory that does not exist, so every case stays fast;
``emulate``, ``cost``, ``export`` and ``report`` may run for real.
"""

from __future__ import annotations

import contextlib
import io
import json

import numpy as np
from _hardening_support import count, examples, scratch_dir
from fxhand import hand_network
from hypothesis import given, note, settings
from hypothesis import strategies as st

import fxnet_widgets as fw
from fxnet_widgets.cli import SUBCOMMANDS, main
from fxnet_widgets.core.images import save_png

WORK = scratch_dir("fxnet-fuzz-cli-")
NET = hand_network(classes=["other", "ripe"])
PLAN = fw.Plan.uniform(NET, weight_bits=8, weight_frac=5, acc_bits=18, table_bits=10, table_frac=6, out_bits=8)
NET.save(WORK / "net.json")
PLAN.save(WORK / "plan.json")
_IMG = np.random.default_rng(1).integers(0, 256, (5, 6, 3), dtype=np.uint8)
save_png(WORK / "img.png", _IMG)
save_png(WORK / "mask.png", ((_IMG[..., 0] > 128) * 255).astype(np.uint8))
np.save(WORK / "codes.npy", _IMG.reshape(-1, 3))
np.save(WORK / "floats.npy", _IMG.reshape(-1, 3).astype(np.float32))
np.save(WORK / "wide.npy", np.full((2, 3), 300, dtype=np.int64))
(WORK / "broken.json").write_text('{"layers": [')
(WORK / "plan-1-layer.json").write_text(json.dumps({"layers": [PLAN.layers[0].to_dict()]}))
(WORK / "text.png").write_text("not a png")
(WORK / "adir").mkdir()

# footage builds 2^24-colour look-ups, synth runs Yosys, refine searches integers: stopped at the output check
HEAVY = {"sweep", "tune", "train", "demo", "footage", "synth", "refine"}
FILES = [str(WORK / n) for n in ("net.json", "plan.json", "img.png", "mask.png", "codes.npy", "floats.npy", "wide.npy",
                                 "broken.json", "plan-1-layer.json", "text.png", "adir", "missing.json")]  # fmt: skip
OUTPUTS = [str(WORK / n) for n in ("out.npz", "out.json", "out.html", "out", "out.txt", "adir")]
OUTPUTS.append("/no/such/dir/x.npz")
NOWHERE = ["/no/such/dir/out.json", "/no/such/dir/out", str(WORK / "net.json" / "x")]
FLAGS = ["-o", "--output", "--json", "--video", "--max-clock", "--multipliers", "--multiplier-size", "--block-bits",
         "--pipeline-stages", "--grid", "--plan", "--layer", "--no-safe-acc", "--labels", "--cost", "--workers",
         "--quiet", "--max-mismatch", "--start", "--hidden", "--activation", "--seed", "--samples", "--classes",
         "--table", "--class-maps", "--vectors", "--force", "--bogus", "--", "-"]  # fmt: skip
VALUES = ["0", "1", "-1", "3", "62", "1e309", "nan", "inf", "-0", "4x3", "18x18", "1280x720p60", "csd", "hard",
          "weight_bits=4:8", "acc_bits=1|2", "out_bits=3:1", "total_bits", "2,2", "other,ripe", "sigmoid", "0.5",
          "9" * 50, "\u202e", "名前", "a\x00b", " ", ""]  # fmt: skip


@st.composite
def argv(draw: st.DrawFn) -> list[str]:
    # `lab` starts a JupyterLab server that runs until stopped: its arguments are tested in tests/cli/test_cli_lab.py
    commands = [c for c in SUBCOMMANDS if c != "lab"]
    command = draw(st.sampled_from([*commands, "emulat", "--version", "-h", "--json"]))
    outputs = NOWHERE if command in HEAVY else OUTPUTS
    token = st.one_of(
        st.sampled_from(FILES),
        st.sampled_from(FLAGS),
        st.sampled_from(VALUES),
        st.text(max_size=8),
    )
    args = [command]
    if command not in HEAVY and draw(st.booleans()):
        # a mostly well-formed call: network, plan, input, then noise
        args += [FILES[0], draw(st.sampled_from(FILES[:2] + FILES[7:9])), draw(st.sampled_from(FILES[2:7] + FILES[9:]))]
    for _ in range(draw(st.integers(0, 6))):
        if draw(st.integers(0, 3)) == 0:
            args += ["-o", draw(st.sampled_from(outputs))]
        else:
            tok = draw(token)
            args.append(tok)
            if tok in ("-o", "--output"):
                args.append(draw(st.sampled_from(outputs)))
    if command in HEAVY and "-o" not in args and "--output" not in args:
        args += ["-o", NOWHERE[0]]
    return args


def run_cli(args: list[str]) -> tuple[int, str, str]:
    out, err = io.StringIO(), io.StringIO()
    with contextlib.redirect_stdout(out), contextlib.redirect_stderr(err):
        code = main(args)
    return code, out.getvalue(), err.getvalue()


def litter() -> list[str]:
    return [p.name for p in WORK.rglob("*.tmp")] + [p.name for p in WORK.rglob(".*") if p.is_file()]


@settings(max_examples=examples(2000))
@given(argv())
def test_fuzzed_command_lines(args):
    count("command lines")
    note(repr(args))
    code, out, err = run_cli(args)
    assert "Traceback" not in err and "Traceback" not in out
    assert code in (0, 2), (code, err)
    if code == 2:
        assert err.endswith("\n") and err.count("\n") == 1, f"stderr is not one line: {err!r}"
        assert err.strip(), "empty error line"
    elif "--json" in args and not {"-h", "--help", "--version"} & set(args) and out:
        json.loads(out)  # one JSON object on stdout (semantics.md, "Command line")
    assert litter() == [], "a temporary file was left behind"


def test_no_command_is_one_line():
    code, out, err = run_cli([])
    assert code == 2 and err.count("\n") == 1 and err.startswith("fxnet: "), err


def test_emulate_then_read_back_exactly():
    code, out, err = run_cli(["emulate", *FILES[:3], "-o", OUTPUTS[0], "--json"])
    assert code == 0, err
    with np.load(OUTPUTS[0], allow_pickle=False) as z:
        assert np.array_equal(z["decisions"], fw.emulate(NET, PLAN, _IMG).decisions.reshape(-1))
