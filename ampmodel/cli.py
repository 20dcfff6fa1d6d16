"""The command line: parse, call, print. Heavy modules are imported inside the commands."""
from __future__ import annotations

import argparse
import math
import os
import shlex
import signal
import sys
import traceback
from pathlib import Path

from ampmodel._version import __version__
from ampmodel.output.tables import quantity_text, run_report_lines, seed_from_line

EXIT_OK, EXIT_INTERNAL, EXIT_BAD_INPUT = 0, 1, 2
EXIT_NO_SOLUTION = 3     # size: the target is out of reach in the range, or a limit is crossed first; fit: no
                         # convergence, a value at an end of its range, or not determined by the data
EXIT_BACKEND = 4         # sweep, spread: the dask cluster cannot be used (unreachable, no ampmodel there)
EXIT_MISMATCH = 5        # rerun: the figures of the new run differ from the stored ones
EXIT_CANNOT_WRITE = 6    # an output cannot be written: no permission, a full disk, a read-only file system
EXIT_INTERRUPTED = 130   # Ctrl-C or SIGTERM


def _parser() -> argparse.ArgumentParser:
    p = argparse.ArgumentParser(
        prog="ampmodel",
        description="Spatially resolved laser-amplifier model: a TOML config in; result.h5, summary.json "
                    "and plots out.")
    p.add_argument("--version", action="version", version=f"ampmodel {__version__}")
    sub = p.add_subparsers(dest="command", metavar="COMMAND")
    r = sub.add_parser("run", help="run one config: writes result.h5, summary.json and plots/")
    r.add_argument("config", help="the run config (TOML)")
    r.add_argument("--out", metavar="DIR", help="output folder (default runs/<config stem>; never overwritten: "
                                                "-2, -3, ... is appended when it exists)")
    r.add_argument("--set", metavar="PATH=VALUE", action="append", default=[], dest="overrides",
                   help="change one value, e.g. --set seed.energy_J=0.01 --set medium.rod.length_mm=80")
    r.add_argument("--no-plots", action="store_true", help="skip the PNG plots")
    r.add_argument("--quiet", action="store_true", help="no progress bar")
    c = sub.add_parser("check", help="validate a config: every problem listed, nothing run or written")
    c.add_argument("config", help="the run config (TOML)")
    c.add_argument("--set", metavar="PATH=VALUE", action="append", default=[], dest="overrides",
                   help="change one value first, like `run --set`")
    media = sub.add_parser("media", help="the built-in materials: a short table; NAME for one material's values "
                                         "and sources; --all for every material's")
    media.add_argument("names", nargs="*", metavar="NAME", help="a built-in material, e.g. Nd:YAG (any letter case)")
    media.add_argument("--all", action="store_true", help="every value and source of every material")
    b = sub.add_parser("bench", help="speed and memory figures against their targets (a few minutes)")
    b.add_argument("--json", metavar="FILE", help="also write the figures to FILE (JSON; never overwritten)")
    b.add_argument("--quick", action="store_true", help="small cases (seconds): checks that the benchmark runs")
    b.add_argument("--quiet", action="store_true", help="no progress bar")
    for name, what in (("sweep", "the sweep in the config's [sweep] table, or given by --vary: in parallel, resumable"),
                       ("spread", "a tolerance run: the samples of the config's [spread] table, with "
                                  "percentiles, histograms, the yield against limits and the sensitivity")):
        w = sub.add_parser(name, help=what)
        w.add_argument("config", help=f"the run config (TOML) with a [{name}] table" + " (or --vary)" * (name == "sweep"))
        w.add_argument("--out", metavar="DIR", help=f"output folder (default runs/<config stem>-{name}); "
                                                    "started again on it, only missing points are computed")
        w.add_argument("--jobs", metavar="N", type=int, help="worker processes (default: every core); with "
                                                             "--backend dask and no --scheduler: local dask workers")
        w.add_argument("--backend", choices=("loky", "dask"), help="loky: processes on this machine (default); "
                                                                    "dask: a dask.distributed cluster")
        w.add_argument("--scheduler", metavar="ADDRESS", help="a running dask scheduler, tcp://host:port "
                                                              "(implies --backend dask); without it the dask "
                                                              "backend starts a local cluster on 127.0.0.1")
        w.add_argument("--timeout", metavar="S", type=float, default=60.0,
                       help="seconds the dask pre-flight check waits for the scheduler and workers (default 60)")
        w.add_argument("--set", metavar="PATH=VALUE", action="append", default=[], dest="overrides",
                       help="change one value of the config first, like `run --set`")
        w.add_argument("--no-plots", action="store_true", help="skip the PNG plots")
        if name == "sweep":
            w.add_argument("--vary", metavar="PATH=V1,V2,...", action="append", default=[], help="a value path and "
                           "its values, e.g. seed.energy_J=0.001,0.01; repeatable; replaces the [sweep] table's paths")
            w.add_argument("--combine", choices=("grid", "zip"), help="every combination, or the lists side by side")
        if name == "spread":
            w.add_argument("--limit", metavar="FIGURE<=VALUE", action="append", default=[], dest="limits",
                           help="a bound on a figure whose yield the run reports, e.g. b_integral_rad<=3 or "
                                "steps.0.peak_fluence_J_cm2<=5 (also >=); repeatable; added to [spread] limits")
        w.add_argument("--quiet", action="store_true", help="no progress bar" +
                       (" and no table of the points" if name == "sweep" else ""))
    e = sub.add_parser("rerun", help="repeat a run from its result file and say whether the figures match")
    e.add_argument("result", help="the result.h5 of a run (or a sweep's points/NNNN.h5)")
    e.add_argument("--out", metavar="DIR", help="the new run's folder (default: <run folder>-rerun beside the "
                                                "run; never overwritten)")
    e.add_argument("--rtol", metavar="X", type=float, default=1e-9,
                   help="relative tolerance of the comparison (default 1e-9)")
    e.add_argument("--current-materials", action="store_true",
                   help="use today's material files instead of the material data stored with the run")
    e.add_argument("--no-plots", action="store_true", help="skip the PNG plots")
    e.add_argument("--quiet", action="store_true", help="no progress bar")
    _size_parser(sub)
    _fit_parser(sub)
    rp = sub.add_parser("report", help="write report.html of a run, sweep, spread, size or fit folder again from "
                                       "its stored results")
    rp.add_argument("folder", metavar="DIR", help="the folder a run, sweep, spread, size --out or fit wrote")
    rp.add_argument("--out", metavar="FILE", help="write the page to FILE instead (never overwritten)")
    return p


def _fit_parser(sub) -> None:
    """The options of ``fit``."""
    f = sub.add_parser("fit", help="fit config values to measured data by least squares")
    f.add_argument("config", help="the run config (TOML)")
    f.add_argument("--data", metavar="DATA.csv", required=True,
                   help="the measurements: columns of conditions (value paths), measured figures (figure paths) "
                        "and optional sigma_<figure>")
    f.add_argument("--vary", metavar="PATH=LOW,HIGH", action="append", default=[],
                   help="a value to fit and its range, e.g. medium.rod.small_signal_gain=2,50; repeatable")
    f.add_argument("--set", metavar="PATH=VALUE", action="append", default=[], dest="overrides",
                   help="change one value of the config first, like `run --set`")
    f.add_argument("--out", metavar="DIR", help="output folder (default runs/<config stem>-fit; never "
                                                "overwritten: -2, -3, ... is appended)")
    f.add_argument("--jobs", metavar="N", type=int, help="worker processes for the rows (default: every core)")
    f.add_argument("--backend", choices=("loky", "dask"), help="loky: processes on this machine (default); "
                                                                "dask: a dask.distributed cluster")
    f.add_argument("--scheduler", metavar="ADDRESS", help="a running dask scheduler, tcp://host:port")
    f.add_argument("--max-evaluations", metavar="N", type=int, dest="max_evaluations",
                   help="the most residual evaluations (default 100 x the number of --vary)")
    f.add_argument("--no-plots", action="store_true", help="skip the PNG plots")
    f.add_argument("--quiet", action="store_true", help="do not list the evaluations")


def _size_parser(sub) -> None:
    """The options of ``size``."""
    z = sub.add_parser("size", help="find the value of one parameter that reaches a target figure, under limits")
    z.add_argument("config", help="the run config (TOML)")
    z.add_argument("--target", metavar="FIGURE=VALUE", required=True,
                   help="a figure of summary.json by its path and the value to reach, e.g. output_energy_J=1.0 "
                        "or steps.2.energy_out_J=0.5")
    z.add_argument("--vary", metavar="PATH", required=True,
                   help="the value path to vary, e.g. medium.rod.small_signal_gain")
    z.add_argument("--within", metavar="LOW,HIGH", required=True, help="the range to search, e.g. 2,50")
    z.add_argument("--limit", metavar="FIGURE<=VALUE", action="append", default=[], dest="limits",
                   help="a bound on a figure that must hold at the answer, e.g. peak_fluence_J_cm2<=5, "
                        "steps.0.peak_fluence_J_cm2<=3 or b_integral_rad<=3 (also >=); repeatable")
    z.add_argument("--xtol", metavar="X", type=float,
                   help="absolute tolerance on the value, > 0 (default 1e-12 x the larger bound)")
    z.add_argument("--rtol", metavar="X", type=float, default=None,
                   help="relative tolerance on the value (default 1e-10; at least 4 x machine epsilon); the "
                        "answer is within xtol + rtol x |value| of the crossing")
    z.add_argument("--set", metavar="PATH=VALUE", action="append", default=[], dest="overrides",
                   help="change one value of the config first, like `run --set`")
    z.add_argument("--out", metavar="DIR", help="also write size.json and the run at the answer (result.h5, "
                                                "summary.json, plots/) into DIR")
    z.add_argument("--quiet", action="store_true", help="do not list the runs of the search")


def _bad_input(problems: list[str]) -> int:
    for line in problems:
        print(line, file=sys.stderr)
    n = len(problems)
    print(f"{n} problem{'s' if n != 1 else ''} in the input; nothing was run or written.", file=sys.stderr)
    return EXIT_BAD_INPUT


def _load(path: str, overrides: list[str]):
    from ampmodel.config.load import load_config
    if not Path(path).is_file():
        from ampmodel.config.checks import ConfigError
        raise ConfigError([f"{path}: no such config file"])
    return load_config(path, overrides)


def cmd_run(args) -> int:
    from ampmodel.output.run_folder import claim, partial_folder
    from ampmodel.simulation import check_memory, simulate
    from ampmodel.studies.report_files import write_report_keeping_results as write_report
    config = _load(args.config, args.overrides)
    check_memory(config)                       # a grid too large: refused before anything is made
    for table, command in (("sweep", "sweep"), ("spread", "spread")):
        if isinstance(config.raw.get(table), dict):
            print(f"note: {args.config} has a [{table}] table; `run` computes its base case only; "
                  f"`{_prog()} {command} {args.config}` runs the table")
    base = Path(args.out) if args.out else Path("runs") / Path(args.config).stem
    with partial_folder(base) as tmp:          # before the computation: an unwritable place fails now
        result = simulate(config, progress=False if args.quiet else None)
        result.save(tmp, plots=not args.no_plots)
        page = write_report(tmp)
        out = claim(tmp, base)
    print(f"ampmodel run: {config.title}")
    print("\n".join(run_report_lines(result.summary)))
    print(f"wrote {out}/ (result.h5, summary.json" + (", plots/" if not args.no_plots else "") +
          (", report.html)" if page else ")"))
    return EXIT_OK


def cmd_rerun(args) -> int:
    from ampmodel.config.checks import ConfigError
    from ampmodel.studies.rerun import rerun
    if not (args.rtol >= 0 and math.isfinite(args.rtol)):
        raise ConfigError([f"ampmodel rerun: --rtol {args.rtol:g}: must be a number >= 0, e.g. 1e-9"])
    report, result = rerun(args.result, args.out, rtol=args.rtol, plots=not args.no_plots,
                           progress=False if args.quiet else None, current_materials=args.current_materials)
    print(f"ampmodel rerun: {result.config.title} (from {report.original}, written by ampmodel "
          f"{report.stored_version})")
    for note in report.notes:
        print(f"note: {note}")
    for what, lines in report.material_differences.items():
        print(f"material data of {what} differ from today's {'files' if what.startswith('built-in') else 'reading'} "
              f"(the rerun uses the {report.used} data):")
        for line in lines:
            print(f"  {line}")
    print(f"wrote {report.out}/ (result.h5, summary.json, rerun.json" + (", plots/" if not args.no_plots else "") +
          (", report.html)" if (report.out / "report.html").is_file() else ")"))
    if report.matched:
        print(f"the figures match: {report.compared} compared, within a relative {report.rtol:g} "
              f"(round-off figures such as energy_balance_error within {report.rtol:g} absolute)")
        return EXIT_OK
    print(f"the figures DIFFER: {len(report.differences)} of {report.compared} outside a relative {report.rtol:g}:")
    for d in report.differences[:40]:
        print(f"  {d.text()}")
    if len(report.differences) > 40:
        print(f"  ... {len(report.differences) - 40} more (rerun.json lists them all)")
    return EXIT_MISMATCH


def cmd_check(args) -> int:
    """Check a config; print "valid" and what the media give only once the gain maps could be built
    (a pump that would raise the gain past what can be represented is bad input, not valid)."""
    from ampmodel.config.checks import ConfigError
    from ampmodel.media import gain_maps
    from ampmodel.simulation import check_memory
    from ampmodel.studies.report import check_lines
    config = _load(args.config, args.overrides)
    need = check_memory(config)
    try:
        lines = check_lines(config)
    except gain_maps.GainMapError as exc:
        raise ConfigError([f"{config.source}: {exc}"]) from None
    nm, ns = len(config.media), len(config.steps)
    print(f"{args.config}: valid ({nm} medi{'um' if nm == 1 else 'a'}, {ns} step{'' if ns == 1 else 's'}, mode {config.mode}, "
          f"about {quantity_text(need, 'B')} of arrays)")
    for line in lines:
        print(line)
    from ampmodel.config.profile import describe
    for line in describe(config):
        print(line)
    if config.seed.beam is not None:           # a chained stage: where its seed comes from
        print(f"  {seed_from_line(config.seed.beam.origin)}")
    return EXIT_OK


def cmd_media(args) -> int:
    from ampmodel.config.checks import ConfigError
    from ampmodel.materials import registry
    if args.names:
        problems = []
        for name in args.names:
            try:
                registry.get(name)
            except KeyError as exc:
                problems.append(f"ampmodel media {name}: {exc.args[0]}")
        if problems:
            raise ConfigError(problems)
        print(registry.table_text(args.names), end="")
    elif args.all:
        print(registry.table_text(), end="")
    else:
        print(registry.short_table(), end="")
    return EXIT_OK


def cmd_bench(args) -> int:
    from ampmodel.config.checks import ConfigError
    out = Path(args.json) if args.json else None
    if out is not None:
        if out.exists():
            raise ConfigError([f"{out}: exists; the benchmark never overwrites earlier figures: give --json "
                               f"a new file name"])
        if not out.parent.is_dir():
            raise ConfigError([f"{out}: the folder {out.parent} does not exist: create it or give --json "
                               f"another path"])
    from ampmodel.bench.report import run_bench, table_text, write_json
    report = run_bench(quick=args.quick, progress=not args.quiet)
    print(table_text(report))
    if out is not None:
        if out.exists():
            raise ConfigError([f"{out}: was created while the benchmark ran; nothing was written: give --json "
                               f"a new file name"])
        write_json(report, out)
        print(f"wrote {out}")
    return EXIT_OK


def _options(args, command: str) -> tuple[str, int | None]:
    """Check the sweep/spread options; return (backend, jobs)."""
    from ampmodel.config.checks import ConfigError
    problems = []
    if args.jobs is not None and args.jobs < 1:
        problems.append(f"--jobs {args.jobs}: must be 1 or more")
    if args.scheduler and args.backend == "loky":
        problems.append(f"--scheduler {args.scheduler}: needs --backend dask (or leave --backend out)")
    if args.scheduler and "://" not in args.scheduler:
        problems.append(f"--scheduler {args.scheduler}: give the address as tcp://host:port")
    if not args.timeout > 0:
        problems.append(f"--timeout {args.timeout:g}: must be a number of seconds > 0")
    if problems:
        raise ConfigError([f"ampmodel {command}: {p}" for p in problems])
    return ("dask" if args.scheduler else args.backend or "loky"), args.jobs


def _many_points(args, command: str, runner, printer) -> int:
    """`sweep` and `spread`: the same options, run in parallel, then the report."""
    backend, jobs = _options(args, command)
    extra = {"limits": args.limits} if command == "spread" else {"vary": args.vary or None, "combine": args.combine}
    result = runner(args.config, args.out, jobs=jobs, backend=backend, scheduler=args.scheduler,
                    overrides=args.overrides, progress=not args.quiet, plots=not args.no_plots,
                    timeout_s=args.timeout, **extra)
    return printer(result, quiet=args.quiet)


def cmd_sweep(args) -> int:
    from ampmodel.studies.report import print_sweep
    from ampmodel.studies.sweeps import run_sweep
    return _many_points(args, "sweep", run_sweep, print_sweep)


def cmd_spread(args) -> int:
    from ampmodel.studies.report import print_spread
    from ampmodel.studies.spread import run_spread
    return _many_points(args, "spread", run_spread, print_spread)


def cmd_size(args) -> int:
    from contextlib import nullcontext

    from ampmodel.output.run_folder import claim, partial_folder
    from ampmodel.studies.report import print_sizing
    from ampmodel.studies.report_files import write_report_keeping_results as write_report
    from ampmodel.studies.sizing import RTOL, plan_sizing, run_sizing
    # every option checked before anything is made: all bad ones at once
    plan = plan_sizing(args.config, args.target, args.vary, args.within, args.limits, overrides=args.overrides,
                       xtol=args.xtol, rtol=RTOL if args.rtol is None else args.rtol)
    report = None if args.quiet else print
    base = Path(args.out) if args.out else None
    # the output folder next: an unwritable place is reported before the search
    with (partial_folder(base) if base is not None else nullcontext(None)) as tmp:
        result = run_sizing(plan, report=report, keep_result=bool(args.out))
        code = print_sizing(result)
        if tmp is not None:
            from ampmodel.output.atomic import write_json
            write_json(result.as_dict(), tmp / "size.json")
            if result.result is not None:
                result.result.save(tmp, plots=True)
            page = write_report(tmp)
            out = claim(tmp, base)
            print(f"wrote {out}/ (size.json" + (", result.h5, summary.json, plots/" if result.result else "") +
                  (", report.html)" if page else ")"))
    return code


def _flushed(line: str) -> None:
    print(line, flush=True)


def cmd_fit(args) -> int:
    from ampmodel.output.run_folder import claim, partial_folder
    from ampmodel.studies.fitting import plan_fit, run_fit
    from ampmodel.studies.report import print_fit
    from ampmodel.studies.report_files import write_report_keeping_results as write_report
    from ampmodel.studies.sweeps import default_folder
    # every option checked before anything is made or run: all bad ones at once
    plan = plan_fit(args.config, args.data, args.vary, overrides=args.overrides,
                    backend="dask" if args.scheduler else args.backend or "loky", jobs=args.jobs,
                    scheduler=args.scheduler, max_evaluations=args.max_evaluations)
    base = Path(args.out) if args.out else default_folder(plan.base, "fit")
    with partial_folder(base) as tmp:          # an unwritable place is reported before the fit
        result = run_fit(plan, report=None if args.quiet else _flushed, curve=not args.no_plots, folder=tmp,
                         progress=not args.quiet)
        code = print_fit(result)
        result.save(tmp, plots=not args.no_plots)
        page = write_report(tmp)
        out = claim(tmp, base)
    print(f"wrote {out}/ (fit.json" + (", plots/" if not args.no_plots else "") + (", report.html)" if page else ")"))
    return code


def cmd_report(args) -> int:
    from ampmodel.studies.report_files import rebuild
    print(f"wrote {rebuild(args.folder, args.out)}")
    return EXIT_OK


COMMANDS = {"run": cmd_run, "check": cmd_check, "media": cmd_media, "bench": cmd_bench, "sweep": cmd_sweep,
            "spread": cmd_spread, "size": cmd_size, "rerun": cmd_rerun, "fit": cmd_fit, "report": cmd_report}


_MAIN_PID = os.getpid()


def _terminate(signum, frame) -> None:
    """SIGTERM (a batch system ending a job, `kill`) stops a command as Ctrl-C does: the same clean-up,
    the same message. Only in the process that runs the command (not in a worker it started)."""
    if os.getpid() == _MAIN_PID:
        raise KeyboardInterrupt


def _install_signal_handlers():
    """Handle SIGTERM like Ctrl-C; return the handler it replaces (None: none was installed)."""
    global _MAIN_PID
    _MAIN_PID = os.getpid()
    try:
        return signal.signal(signal.SIGTERM, _terminate)
    except (ValueError, OSError):      # not the main thread (an embedding program): leave it alone
        return None


def _prog() -> str:
    """How the user started ampmodel: `python3 -m ampmodel` or `ampmodel`."""
    if Path(sys.argv[0]).name == "__main__.py":
        return f"{Path(sys.executable).name} -m ampmodel"
    return "ampmodel"


def resume_command(argv: list[str], out: Path | None) -> str:
    """The command that starts a stopped sweep or spread again on the same folder: the one given, with
    ``--out`` added when the folder was the default one."""
    words = list(argv)
    if out is not None and not any(w == "--out" or w.startswith("--out=") for w in words):
        words += ["--out", str(out)]
    return f"{_prog()} {shlex.join(words)}"


def _stopped(command: str, err: BaseException, argv: list[str], why: str) -> None:
    """What a stopped sweep or spread prints: how far it got and the exact command that resumes it."""
    progress = getattr(err, "progress", None)
    label = "samples" if command == "spread" else "points"
    if progress is not None and progress.done is not None:
        table = Path(progress.out) / ("samples.h5" if command == "spread" else "sweep.h5")
        kept = (f"{progress.done} of {progress.total} {label} are done and kept in {progress.out}/ "
                + (f"(the {'samples' if command == 'spread' else 'sweep'} table lists them)" if table.is_file()
                   else "(their point files; the table is written when the run goes on)"))
    elif progress is not None:
        kept = f"the {label} done so far are kept in {progress.out}/"
    else:
        kept = f"the {label} done so far are kept"
    print(f"{why}: {kept}; to compute the rest, run the same command again:", file=sys.stderr)
    print(f"  {resume_command(argv, progress.out if progress is not None else None)}", file=sys.stderr)


def main(argv: list[str] | None = None) -> int:
    parser = _parser()
    argv = sys.argv[1:] if argv is None else list(argv)
    args = parser.parse_args(argv)
    if args.command is None:
        parser.print_help()
        return EXIT_BAD_INPUT
    previous = _install_signal_handlers()
    try:
        return _dispatch(args, argv)
    finally:
        if previous is not None:
            signal.signal(signal.SIGTERM, previous)


def _dispatch(args, argv: list[str]) -> int:
    """Run the command; turn every kind of failure into its message and exit code."""
    from ampmodel.config.checks import ConfigError
    from ampmodel.output.atomic import OutputError, describe_write_error, is_write_error
    from ampmodel.studies.backends import BackendError, WorkerLost
    from ampmodel.studies.store import FolderError
    resumable = args.command in ("sweep", "spread")
    try:
        return COMMANDS[args.command](args)
    except ConfigError as err:
        return _bad_input(err.problems)
    except FolderError as err:
        print(f"ampmodel {args.command}: {err}", file=sys.stderr)
        print("nothing was run or written.", file=sys.stderr)
        return EXIT_BAD_INPUT
    except BackendError as err:
        print(f"ampmodel {args.command}: {err}", file=sys.stderr)
        print("nothing was run; the points already in the output folder are kept.", file=sys.stderr)
        return EXIT_BACKEND
    except KeyboardInterrupt as err:
        if resumable:
            _stopped(args.command, err, argv, "interrupted")
        else:
            print("interrupted: nothing was written (the unfinished output was removed).", file=sys.stderr)
        return EXIT_INTERRUPTED
    except BrokenPipeError:              # `ampmodel ... | head`: the reader left; the files are written
        os.dup2(os.open(os.devnull, os.O_WRONLY), sys.stdout.fileno())
        return EXIT_OK
    except (OutputError, OSError) as err:
        if isinstance(err, OSError) and not is_write_error(err):
            print(f"ampmodel {args.command}: cannot write or read a file: {err}", file=sys.stderr)
            return EXIT_INTERNAL
        print(f"ampmodel {args.command}: {err if isinstance(err, OutputError) else describe_write_error(err)}",
              file=sys.stderr)
        if resumable and getattr(err, "progress", None) is not None:
            _stopped(args.command, err, argv, "stopped")
        else:
            print("nothing was kept (an unfinished output is removed).", file=sys.stderr)
        return EXIT_CANNOT_WRITE
    except WorkerLost as err:
        print(f"ampmodel {args.command}: {err}", file=sys.stderr)
        _stopped(args.command, err, argv, "stopped")
        return EXIT_INTERNAL
    except Exception:  # an internal failure: say so, with the details for a bug report
        print("ampmodel: internal error (please report it with the config and this message):", file=sys.stderr)
        traceback.print_exc()
        return EXIT_INTERNAL


if __name__ == "__main__":
    sys.exit(main())
