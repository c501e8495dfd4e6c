"""``fxnet tune NETWORK DATA --max-mismatch 0.001 -o PLAN.json [--refine] [--synth-check]``."""

from __future__ import annotations

import argparse
import os
from typing import Any

from ..core.analysis.cost import CALIBRATED_KEYS
from ..core.analysis.search import TuneResult, tune
from ._common import CliError, check_output_path, load_input, load_network, load_plan, one_line, print_json
from .sweep import add_common, check_cost, check_target, executor_for, load_labels, progress_for


def register(sub: argparse._SubParsersAction) -> None:
    p = sub.add_parser("tune", help="find the cheapest plan whose decisions stay within an error budget")
    p.add_argument("network", help="network file (fxnet.network JSON)")
    p.add_argument("data", help="image file (RGB) or .npy of unsigned codes, N x n_in")
    p.add_argument(
        "--max-mismatch", required=True, metavar="F", help="fraction of decisions that may differ from float"
    )
    p.add_argument("-o", "--output", required=True,
                   help="plan file to write (.json); with --refine a refined network goes beside it "
                        "(PLAN.network.json)")  # fmt: skip
    p.add_argument("--start", metavar="PLAN", help="starting plan (default: the generous, overflow-free start)")
    p.add_argument("--synth-check", action="store_true",
                   help="synthesize the answer for --target (Yosys, nextpnr-ice40) and print measured vs estimate")
    p.add_argument("--clock", metavar="MHZ", help="with --synth-check: the clock to meet, in MHz")
    add_common(p)
    p.set_defaults(func=run)


def network_path(plan_path: str) -> str:
    """Where the refined network of ``PLAN.json`` goes: ``PLAN.network.json``."""
    return plan_path[: -len(".json")] + ".network.json"


def _write(res: TuneResult, out: str) -> str | None:
    """The plan, and with refined integers their network beside it; each file atomic, the pair too
    (a failed plan write removes the network just written)."""
    if not res.refined:
        res.plan.save(out)
        return None
    assert res.network is not None
    net_out = network_path(out)
    res.network.save(net_out)
    try:
        res.plan.save(out)
    except BaseException:
        os.remove(net_out)
        raise
    return net_out


def _synth_check(res: TuneResult, target: str, clock: float | None) -> dict[str, Any]:
    from ..core.synth import SynthesisCancelled, ToolError, synthesize

    assert res.network is not None
    try:
        got = synthesize(res.network, res.plan, target=target, clock_mhz=clock)
    except (ToolError, SynthesisCancelled) as exc:
        msg = one_line(" | ".join(ln.strip() for ln in str(exc).splitlines()))
        raise CliError(f"fxnet tune: --synth-check: {msg} (the plan was written)") from None
    try:
        est: dict[str, int] | None = res.cost.estimated()
    except ValueError:
        est = None  # no calibration for this target
    return {"result": got, "estimate": est}


def _check_lines(check: dict[str, Any]) -> list[str]:
    got, est = check["result"], check["estimate"]
    lines = [f"synthesis check on {got.target} ({got.device}): measured vs calibrated estimate"]
    for key, name in (("luts", "LUTs"), ("ffs", "flip-flops"), ("brams", "block RAMs")):
        measured = int(getattr(got, key))
        if est is None:
            lines.append(f"  {name}: {measured} (no calibrated estimate for {got.target})")
        else:
            e = est[key]
            rel = f", {100 * (e - measured) / measured:+.1f} %" if measured else ""
            lines.append(f"  {name}: {measured}, estimate {e}{rel}")
    if got.fmax_mhz is not None:
        lines.append(f"  maximum clock (nextpnr, seed {got.seed}): {got.fmax_mhz:.2f} MHz")
        if got.meets_clock is not None:
            lines.append(f"  required clock {got.clock_mhz:g} MHz: {'met' if got.meets_clock else 'NOT met'}")
    else:
        lines.append("  maximum clock: not timed (no place and route for this target)")
    if got.clock_mhz is not None:
        lines.append("  (the estimates are calibrated on datapaths generated without a clock: pipelining for "
                     "--clock adds flip-flops they do not count)")  # fmt: skip
    lines.append("  tools: " + "; ".join(got.tools.values()))
    lines.append(f"  {got.caution}")
    return lines


def run(args: argparse.Namespace) -> int:
    net = load_network(args.network)
    try:
        budget = float(args.max_mismatch)
    except ValueError:
        budget = float("nan")
    if not 0 <= budget <= 1:
        raise CliError(f"fxnet tune: --max-mismatch must be a fraction between 0 and 1, not {args.max_mismatch!r}")
    clock = None
    if args.clock is not None:
        if not args.synth_check:
            raise CliError("fxnet tune: --clock needs --synth-check")
        try:
            clock = float(args.clock)
        except ValueError:
            clock = float("nan")
        if not 0 < clock < 10_000:
            raise CliError(f"fxnet tune: --clock must be a number of MHz between 0 and 10000, not {args.clock!r}")
    start = load_plan(args.start, net) if args.start else None
    codes, note = load_input(args.data, net)
    labels = load_labels(args.labels, net, codes) if args.labels else None
    out = check_output_path(args.output, ".json")
    cost = check_cost(args.cost)
    target = check_target("tune", args.target, cost)
    ex = executor_for(args.workers)
    try:
        res = tune(
            net, codes, budget, labels=labels, start=start, cost=cost, cost_options={"target": target}, executor=ex,
            progress=progress_for(args), refine=args.refine or False,
        )  # fmt: skip
    finally:
        if ex is not None:
            ex.shutdown()
    net_out = _write(res, out)
    check = _synth_check(res, target, clock) if args.synth_check else None
    if args.json:
        doc = res.to_dict()
        doc["output"] = out
        doc["network_output"] = net_out
        if check is not None:
            doc["synth_check"] = {"measured": check["result"].to_dict(), "estimate": check["estimate"]}
        print_json(doc)
    else:
        if note:
            print(f"input {args.data}: {note}")
        print(res.summary())
        print(res.metrics.summary())
        print(res.cost.summary())
        if cost in CALIBRATED_KEYS:
            print(f"{cost}: calibrated estimate for {target}: {res.cost.value(cost)} (not a synthesis result)")
        if check is not None:
            print("\n".join(_check_lines(check)))
        print(f"wrote {out}")
        if net_out is not None:
            print(f"wrote {net_out}: the refined network this plan is for (use it with the plan, e.g. "
                  "fxnet export / fxnet datapath; with the original network the plan misses the budget)")
        elif args.refine:
            print("refinement was not needed: the plan is for the original network")
        if net_out is None and os.path.exists(network_path(out)):
            print(f"note: {network_path(out)} is from an earlier run; this plan is for the original network")
    return 0
