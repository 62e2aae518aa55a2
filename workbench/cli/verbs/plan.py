"""``foldline plan``: judge the plan's candidate rates and recommend rate and angle-domain settings."""

from __future__ import annotations

from workbench.cli.output import finish, print_frame
from workbench.cli.verbs import add_verb

__all__ = ["register", "cmd_plan", "print_advice"]


def cmd_plan(args) -> int:
    """The plan's advice (warnings go to stderr through the command's one-line handler)."""
    from workbench.machine import read_machine
    from workbench.sampling import advise, read_plan

    machine = read_machine(args.machine)
    plan = read_plan(args.plan)
    advice = advise(machine, plan)
    return finish(args, advice.to_dict(), lambda: print_advice(machine, plan, advice))


def print_advice(machine, plan, advice) -> None:
    """The advice as text: candidate rates, the recommendation, angle-domain settings, notes
    and the crossings of lines with resonances."""
    cand = advice.candidates.copy()
    print(f"{machine.name}: {plan.speed.rpm_min:g}-{plan.speed.rpm_max:g} rpm, filter {plan.filter.describe()}")
    print_frame(cand, digits=".1f")
    rec = advice.recommended_rate_hz
    print(f"\nrecommended rate: {rec:g} Hz" if rec is not None else
          "\nno rate recommended: none is both clean (no collision) and captures the highest order")
    rs = advice.resampling
    print(
        f"angle domain: {rs.samples_per_rev} samples/rev (max order {rs.max_order:g}), "
        f"{rs.revs_per_block} revs/block (order resolution {rs.order_resolution:g}), "
        f"lowest rate capturing order {rs.max_order:g} at {rs.top_speed_rpm:g} rpm: {rs.min_rate_hz:.0f} Hz"
    )
    print(
        f"a plain time-domain FFT would smear order {rs.max_order:g} over {rs.smearing_bins:.1f} bins "
        f"({rs.smearing_hz:.1f} Hz) per block at the fastest sweep"
    )
    for note in advice.notes:
        print(f"  - {note}")
    crossings = getattr(advice, "crossings", None)
    if crossings is not None and len(crossings):
        cols = ["line", "resonance", "rpm", "time_s", "sweep_rpm_per_s", "peak_loss_db", "sweep_ok",
                "slowest_sweep_rpm_per_s"]
        print(f"\ncrossings of lines with resonances and criticals: {len(crossings)}")
        fmt = {"rpm": "{:.0f}".format, "time_s": "{:.1f}".format, "sweep_rpm_per_s": "{:.3g}".format,
               "peak_loss_db": "{:.2f}".format, "slowest_sweep_rpm_per_s": "{:.3g}".format}
        print(crossings[cols].to_string(index=False, formatters=fmt))


def register(subparsers) -> None:
    """Add ``foldline plan`` to the command."""
    p = add_verb(subparsers, "plan", "judge the plan's candidate rates and recommend rate and angle-domain settings")
    p.add_argument("machine", metavar="MACHINE")
    p.add_argument("plan", metavar="PLAN")
    p.set_defaults(func=cmd_plan)
