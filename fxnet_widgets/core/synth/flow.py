"""``synthesize``: a Verilog design (or a network and plan) through Yosys and nextpnr-ice40.

The tools run in a temporary directory (removed afterwards) holding a copy of the
design's files, with the design directory's layout (``$readmemh`` files are opened
by bare name). Results are cached by value: the hash of every design file, the top
module, the target, the clock, the seed and the tool versions names one JSON file
under ``~/.cache/fxnet-widgets/synth`` (or ``$FXNET_SYNTH_CACHE``), written atomically.
"""

from __future__ import annotations

import hashlib
import json
import os
import tempfile
import threading
from collections.abc import Callable
from pathlib import Path
from typing import Any

from ..analysis.video import VIDEO_FORMATS
from ..fileio import FileFormatError, atomic_write_bytes, atomic_write_json, load_json, loads_json
from .netlist import WRAPPER, cell_counts, nextpnr_figures, ports, resource_counts, wrapper_verilog
from .result import SynthesisResult
from .targets import target as get_target
from .tools import SynthesisCancelled, ToolError, run_tool, tool_version

__all__ = ["synthesize", "default_cache_dir", "FLOW_VERSION"]

#: bump when the flow changes what it measures (part of every cache key)
FLOW_VERSION = 1
_MAX_DESIGN_BYTES = 64 * 1024 * 1024
Progress = Callable[[float, str], None]


def default_cache_dir() -> Path:
    """``$FXNET_SYNTH_CACHE`` if set, else ``~/.cache/fxnet-widgets/synth``."""
    env = os.environ.get("FXNET_SYNTH_CACHE")
    return Path(env) if env else Path.home() / ".cache" / "fxnet-widgets" / "synth"


def _design_files(source: Path) -> dict[str, bytes]:
    """Every regular, non-hidden file of a design directory (or one ``.v`` file), by name."""
    if source.is_file():
        if source.suffix != ".v":
            raise ValueError(f"{source}: a design file must end in .v, not {source.suffix!r}")
        entries = [source]
    elif source.is_dir():
        entries = sorted(p for p in source.iterdir() if p.is_file() and not p.name.startswith("."))
        if not any(p.suffix == ".v" for p in entries):
            raise ValueError(f"{source}: a design directory must hold at least one .v file, but it holds none")
    else:
        raise FileFormatError(f"{source}: no such file or directory")
    files, total = {}, 0
    for p in entries:
        data = p.read_bytes()
        total += len(data)
        if total > _MAX_DESIGN_BYTES:
            raise ValueError(f"{source}: a design must be at most {_MAX_DESIGN_BYTES} bytes, not more")
        files[p.name] = data
    return files


def _digest(files: dict[str, bytes]) -> str:
    h = hashlib.sha256()
    for name in sorted(files):
        h.update(name.encode("utf-8") + b"\0" + len(files[name]).to_bytes(8, "big") + files[name])
    return h.hexdigest()


def _plan_digest(network: Any, plan: Any) -> str:
    doc = json.dumps([network.digest, plan.to_dict()], sort_keys=True, allow_nan=False)
    return hashlib.sha256(doc.encode("utf-8")).hexdigest()


def _clock(clock_mhz: float | None, video: str | None) -> float | None:
    if video is not None:
        if video not in VIDEO_FORMATS:
            raise ValueError(f"video must be one of {', '.join(VIDEO_FORMATS)}, not {video!r}")
        if clock_mhz is not None:
            raise ValueError(f"clock_mhz must be None when a video format is given, not {clock_mhz!r}")
        return VIDEO_FORMATS[video].pixel_clock_hz / 1e6
    if clock_mhz is None:
        return None
    if isinstance(clock_mhz, bool) or not isinstance(clock_mhz, (int, float)) or not 0 < clock_mhz < 10_000:
        raise ValueError(f"clock_mhz must be a number of MHz between 0 and 10000, not {clock_mhz!r}")
    return float(clock_mhz)


def _write_datapath(network: Any, plan: Any, directory: Path, options: dict[str, Any]) -> None:
    from ..datapath import write_datapath

    write_datapath(network, plan, directory, **{k: v for k, v in options.items() if v is not None})


def _latency(files: dict[str, bytes]) -> int | None:
    raw = files.get("datapath.json")
    if raw is None:
        return None
    try:
        value = loads_json(raw.decode("utf-8"), "datapath.json").get("latency")
    except (ValueError, AttributeError):
        return None
    return value if isinstance(value, int) and not isinstance(value, bool) else None


def synthesize(
    source: str | os.PathLike[str] | Any,
    plan: Any = None,
    *,
    target: str = "ice40-up5k",
    top: str = "fxnet_datapath",
    clock: str = "clk",
    clock_mhz: float | None = None,
    video: str | None = None,
    pipeline: int | str | None = None,
    products: str = "shift-add",
    seed: int = 1,
    place: bool = True,
    timeout: float = 600.0,
    progress: Progress | None = None,
    cancel: threading.Event | None = None,
    cache: bool = True,
    cache_dir: str | os.PathLike[str] | None = None,
    keep_dir: str | os.PathLike[str] | None = None,
) -> SynthesisResult:
    """Synthesize a design with Yosys and, on iCE40 targets, place and route it with nextpnr-ice40.

    Parameters
    ----------
    source
        A directory written by ``write_datapath`` (or any directory of Verilog files),
        one ``.v`` file, or a :class:`~fxnet_widgets.core.network.Network` (then ``plan``
        is required and the datapath is generated with ``write_datapath``).
    target
        One of :data:`~fxnet_widgets.core.synth.targets.TARGETS`.
    top, clock
        Top module and its clock input.
    clock_mhz, video
        The clock to meet, in MHz, or a video format whose pixel clock it is (at most one).
        nextpnr places for it; ``meets_clock`` compares it with the maximum clock reached.
    pipeline, products
        Passed to ``write_datapath`` (with the clock) when ``source`` is a network. Products
        default to ``"shift-add"`` (each constant product as shifted inputs in the adder tree):
        on an iCE40 UP5K the demo met 74.25 MHz that way and not with ``*`` mapped to DSP
        blocks, and Yosys 0.23's ICE40_DSP pass crashes on some ``*`` designs.
    seed
        nextpnr's placement seed (fixed, so runs repeat).
    place
        False: synthesis only (resource counts, no timing), even on iCE40.
    timeout
        Seconds each tool may run.
    progress
        Called as ``progress(fraction, message)`` before each stage.
    cancel
        A :class:`threading.Event`; setting it stops the running tool (``SynthesisCancelled``).
    cache, cache_dir
        Read and write results cached by value (default directory: :func:`default_cache_dir`).
    keep_dir
        An existing directory to receive the run's scripts, logs and netlists (a run
        answered from the cache writes none).

    Examples
    --------
    >>> r = synthesize("build/datapath", target="ice40-up5k", video="1280x720p60")  # doctest: +SKIP
    >>> r.luts, r.fmax_mhz, r.meets_clock  # doctest: +SKIP
    """
    t = get_target(target)
    wanted = _clock(clock_mhz, video)
    if isinstance(seed, bool) or not isinstance(seed, int) or not 0 <= seed < 2**31:
        raise ValueError(f"seed must be an integer between 0 and 2**31 - 1, not {seed!r}")
    if not (isinstance(timeout, (int, float)) and timeout > 0):
        raise ValueError(f"timeout must be a positive number of seconds, not {timeout!r}")
    if keep_dir is not None and not Path(keep_dir).is_dir():
        raise FileFormatError(f"{keep_dir}: keep_dir must be an existing directory, but it is not")
    say: Progress = progress or (lambda fraction, message: None)
    tools = {"yosys": tool_version("yosys")}
    places = t.places and bool(place)
    if places:
        tools["nextpnr-ice40"] = tool_version("nextpnr-ice40")
    with tempfile.TemporaryDirectory(prefix="fxnet-synth-") as tmp:
        work = Path(tmp)
        plan_digest = None
        if isinstance(source, (str, os.PathLike)):
            files = _design_files(Path(source))
        else:
            if plan is None:
                raise TypeError(f"plan must be given with a network, not {plan!r}")
            say(0.0, "writing the datapath")
            options = {"pipeline": pipeline, "clock_mhz": clock_mhz, "video": video, "products": products}
            _write_datapath(source, plan, work / "design", options)
            files, plan_digest = _design_files(work / "design"), _plan_digest(source, plan)
        design_digest = _digest(files)
        key_doc = [FLOW_VERSION, design_digest, top, clock, target, wanted, seed, places, tools]
        key = hashlib.sha256(json.dumps(key_doc, sort_keys=True).encode("utf-8")).hexdigest()
        where = Path(cache_dir) if cache_dir is not None else default_cache_dir()
        hit = _cache_read(where / f"{key}.json") if cache else None
        if hit is not None:
            say(1.0, "done (from the cache)")
            return _with_plan(hit, plan_digest)
        run = work / "run"
        run.mkdir()
        for name, data in files.items():
            (run / name).write_bytes(data)
        sources = " ".join(sorted(n for n in files if n.endswith(".v")))
        say(0.1, "yosys: reading the design")
        (run / "ports.ys").write_text(f"read_verilog {sources}\nproc\nwrite_json ports.json\n")
        run_tool("yosys", ["-q", "-l", "ports.log", "-s", "ports.ys"], run, timeout=timeout, cancel=cancel,
                 log="ports.out")  # fmt: skip
        port_list = ports(load_json(run / "ports.json"), top, what=str(source) if plan_digest is None else "datapath")
        (run / f"{WRAPPER}.v").write_text(wrapper_verilog(top, port_list, clock))
        say(0.25, f"yosys: synthesis for {t.name}")
        script = t.yosys_command.format(top=WRAPPER, json="synth.json").replace("; ", "\n")
        (run / "synth.ys").write_text(f"read_verilog {sources} {WRAPPER}.v\nhierarchy -check -top {WRAPPER}\n"
                                      f"setattr -mod -set keep_hierarchy 1 {top}\n{script}\n")  # fmt: skip
        run_tool("yosys", ["-q", "-l", "synth.log", "-s", "synth.ys"], run, timeout=timeout, cancel=cancel,
                 log="synth.out")  # fmt: skip
        counts = resource_counts(cell_counts(load_json(run / "synth.json"), top), t)
        capacity = {"luts": t.luts, "ffs": t.ffs, "brams": t.brams, "dsps": t.dsps}
        fits = all(cap is None or counts[k] <= cap for k, cap in capacity.items())
        fmax, use = None, {}
        if places and fits:
            say(0.6, f"nextpnr-ice40: place and route on {t.device}")
            args = [*t.nextpnr, "--json", "synth.json", "--seed", str(seed), "--report", "report.json",
                    "--timing-allow-fail"]  # a clock not met is a result, not a failure
            if wanted is not None:
                args += ["--freq", f"{wanted:.6f}"]
            run_tool("nextpnr-ice40", args, run, timeout=timeout, cancel=cancel)
            figures = nextpnr_figures(load_json(run / "report.json"))
            fmax, use = figures["fmax_mhz"], figures["utilization"]
        meets = None if fmax is None or wanted is None else bool(fmax >= wanted)
        result = SynthesisResult(
            target=t.name, device=t.device, top=top, luts=counts["luts"], ffs=counts["ffs"],
            carries=counts["carries"], brams=counts["brams"], dsps=counts["dsps"], capacity=capacity,
            fits=fits, fmax_mhz=fmax,
            clock_mhz=wanted, video=video, meets_clock=meets, latency=_latency(files), seed=seed, tools=tools,
            utilization=use, design_digest=design_digest, plan_digest=None, key=key,
        )  # fmt: skip
        if keep_dir is not None:
            _keep(run, Path(keep_dir))
        if cache:
            where.mkdir(parents=True, exist_ok=True)
            atomic_write_json(where / f"{key}.json", result.to_dict())
        say(1.0, "done")
        return _with_plan(result, plan_digest)


def _keep(run: Path, keep: Path) -> None:
    for p in sorted(run.iterdir()):
        if p.is_file():
            atomic_write_bytes(keep / p.name, p.read_bytes())


def _with_plan(result: SynthesisResult, plan_digest: str | None) -> SynthesisResult:
    """The cache holds design figures only; which plan they are for is the caller's."""
    if plan_digest is None:
        return result
    d = result.to_dict()
    d["plan_digest"] = plan_digest
    return SynthesisResult.from_dict(d, cached=result.cached)


def _cache_read(path: Path) -> SynthesisResult | None:
    if not path.exists():
        return None
    try:
        return SynthesisResult.from_dict(load_json(path), cached=True)
    except (ValueError, TypeError):
        return None  # a damaged or older record: synthesize again


__all__ += ["SynthesisCancelled", "ToolError"]
