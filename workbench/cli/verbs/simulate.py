"""``foldline simulate``: a synthesized run of the machine under the plan at one rate (WAV +
sidecar)."""

from __future__ import annotations

from pathlib import Path

from workbench.cli.output import finish, rate_option
from workbench.cli.verbs import add_verb
from workbench.errors import InputError

__all__ = ["register", "cmd_simulate"]


def cmd_simulate(args) -> int:
    """Synthesize a run of the machine under the plan at one rate, written as WAV + sidecar."""
    from workbench.fileio import file_sha256
    from workbench.machine import read_machine
    from workbench.runs import read_run, simulate_to_wav
    from workbench.sampling import read_plan
    from workbench.sampling.guards import warn_implausible_rate

    machine = read_machine(args.machine)
    plan = read_plan(args.plan)
    rate = rate_option(args.rate)
    warn_implausible_rate(rate, lines=machine.lines(), top_rpm=plan.speed.rpm_max, name="--rate")
    out = Path(args.out)
    if out.suffix.lower() != ".wav":
        raise InputError(f"--out {args.out}: the simulated run is written as WAV; give a name ending in .wav")
    machine_file = Path(args.machine) if Path(args.machine).resolve().parent == out.resolve().parent else None
    path = simulate_to_wav(
        machine,
        plan,
        rate,
        out,
        seed=args.seed,
        duration_s=args.duration,
        noise_db=args.noise_db,
        resonance_hz=args.resonance_hz,
        pulses_per_rev=args.pulses_per_rev,
        missing_pulses=args.missing_pulses,
        machine_file=machine_file,
        tacho_rise_s=None if args.tacho_rise_ms is None else args.tacho_rise_ms / 1000.0,
        sample_format=args.format,
        force=args.force,
    )
    run = read_run(path)
    result = {
        "out": str(path),
        "sidecar": str(Path(path).with_suffix(".json")),
        "rate_hz": run.rate_hz,
        "duration_s": run.duration_s,
        "n_samples": run.n_samples,
        "channels": [c.name for c in run.channels],
        "tacho": run.tacho,
        "pulses_per_rev": run.pulses_per_rev,
        "missing_pulses": run.missing_pulses,
        "seed": args.seed,
        "sha256": file_sha256(path),
    }

    def show():
        print(f"simulated {run.duration_s:.1f} s at {run.rate_hz:g} S/s -> {path} (+ sidecar), seed {args.seed}")
        print(f"channels: {', '.join(result['channels'])}; tacho: {run.tacho}, {run.pulses_per_rev} pulses/rev"
              + (f" with {run.missing_pulses} missing" if run.missing_pulses else ""))

    return finish(args, result, show)


def register(subparsers) -> None:
    """Add ``foldline simulate`` to the command."""
    p = add_verb(subparsers, "simulate", "synthesize a run of the machine under the plan at one rate (WAV + sidecar)")
    p.add_argument("machine", metavar="MACHINE")
    p.add_argument("plan", metavar="PLAN")
    p.add_argument("--rate", required=True, type=float, metavar="HZ", help="sample rate, Hz")
    p.add_argument("--out", required=True, metavar="RUN.wav", help="output WAV file (a .json sidecar is written beside it)")
    p.add_argument("--seed", type=int, default=0, help="random seed (same seed, same bytes)")
    p.add_argument("--duration", type=float, metavar="S", help="seconds to simulate (default: the profile's duration)")
    p.add_argument("--noise-db", type=float, default=-60.0, metavar="DB", help="broadband noise, dB re 1 unit RMS")
    p.add_argument("--resonance-hz", type=float, metavar="HZ", help="structural resonance, Hz (default 700, the same at every rate)")
    p.add_argument("--pulses-per-rev", type=int, default=1, metavar="N", help="tacho tooth positions per rev")
    p.add_argument("--missing-pulses", type=int, default=0, metavar="M", help="missing teeth of the tacho wheel")
    p.add_argument("--tacho-rise-ms", type=float, metavar="MS",
                   help="rise time of each tacho edge, ms (default 4 samples; 0 gives ideal steps)")
    p.add_argument("--format", choices=("float32", "int16", "int24", "int32"), default="float32", help="WAV sample format")
    p.add_argument("--force", action="store_true", help="overwrite an existing output file")
    p.set_defaults(func=cmd_simulate)
