"""Command line: parse arguments, call the library, print, set the exit code.

Exit status: 0 success; 1 a result did not converge (what converged is
written); 2 bad input or usage, with one line on stderr naming file and key.
"""
from __future__ import annotations

import argparse
import contextlib
import logging
import signal
import sys
import threading
import time
from pathlib import Path

from . import CAUTION, __version__

log = logging.getLogger("cablefe")

EXAMPLES = {
    "check": "examples:\n  cablefe check cases/heavy_cable.toml",
    "solve": "examples:\n  cablefe solve cases/heavy_cable.toml -o out/heavy\n"
             "  cablefe solve cases/hanger_deck.toml -o out/deck --only crowd-left",
    "run": "examples:\n  cablefe run cases/hanger_deck.toml -o out/deck\n"
           "  cablefe run cases/shaped_footbridge.toml -o out/footbridge   # shapes first",
    "shape": "examples:\n  cablefe shape cases/shaped_footbridge.toml -o out/footbridge.toml\n"
             "      writes out/footbridge.toml (the shaped case) and out/footbridge-cutting.csv\n"
             "  cablefe solve out/footbridge.toml -o out/footbridge   # analyse the shaped case",
}


class UsageError(Exception):
    pass


class _Parser(argparse.ArgumentParser):
    def error(self, message):  # exit 2 with one line, as for bad input
        raise UsageError(f"{self.prog}: {message}")


def _parser() -> argparse.ArgumentParser:
    p = _Parser(prog="cablefe", description="Nonlinear analysis and form-finding of cable structures. "
                + CAUTION)
    p.add_argument("--version", action="version", version=f"cablefe {__version__}")
    p.add_argument("-v", "--verbose", action="store_true", help="log every load increment")
    sub = p.add_subparsers(dest="command", required=True, parser_class=_Parser)

    c = sub.add_parser("check", help="validate a case and print a model summary",
                       epilog=EXAMPLES["check"], formatter_class=argparse.RawDescriptionHelpFormatter)
    c.add_argument("case", help="case file (TOML)")

    text = ("form-finding by the case's [shape] table: write the shaped case (equilibrium coordinates "
            "under the permanent loads, unstressed lengths) and its cutting table beside it")
    f = sub.add_parser("shape", help="form-finding: write the shaped case and its cutting table",
                       description=text, epilog=EXAMPLES["shape"],
                       formatter_class=argparse.RawDescriptionHelpFormatter)
    f.add_argument("case", help="case file (TOML) with a [shape] table")
    f.add_argument("-o", "--output", required=True, metavar="SHAPED.toml",
                   help="shaped case to write; the cutting table goes to SHAPED-cutting.csv beside it")
    f.add_argument("--solver", choices=["auto", "superlu", "splu-default", "pardiso"],
                   help="sparse linear solver backend (default: [analysis] solver or auto)")

    for name, text in (("solve", "nonlinear static analysis of every combination"),
                       ("run", "everything the case asks for: shape (if [shape]), solve, further studies, "
                               "design checks and sizing (if [design]), report.html")):
        s = sub.add_parser(name, help=text, description=text, epilog=EXAMPLES[name],
                           formatter_class=argparse.RawDescriptionHelpFormatter)
        s.add_argument("case", help="case file (TOML)")
        s.add_argument("-o", "--output", required=True, help="output folder")
        s.add_argument("--only", action="append", metavar="NAME",
                       help="solve only this combination (repeatable)")
        s.add_argument("--solver", choices=["auto", "superlu", "splu-default", "pardiso"],
                       help="sparse linear solver backend (default: [analysis] solver or auto)")
        if name == "run":
            _study_options(s)
    s = sub.add_parser("study", help="run the case's [[studies]] alone (solving their base results)",
                       description="live-load studies: influence lines, worst patches, sweeps, tolerances")
    s.add_argument("case", help="case file (TOML)")
    s.add_argument("-o", "--output", required=True, help="output folder")
    s.add_argument("--only", action="append", metavar="NAME", help="run only this study (repeatable)")
    s.add_argument("--solver", choices=["auto", "superlu", "splu-default", "pardiso"],
                   help="sparse linear solver backend (default: [analysis] solver or auto)")
    _study_options(s)
    text = "natural modes about a converged result (and the pedestrian check when configured): [modes]"
    s = sub.add_parser("modes", help=text, description=text, epilog="examples:\n  cablefe modes "
                       "cases/generated-suspension.toml -o out/modes",
                       formatter_class=argparse.RawDescriptionHelpFormatter)
    s.add_argument("case", help="case file (TOML) with a [modes] table")
    s.add_argument("-o", "--output", required=True, help="output folder")
    s.add_argument("--solver", choices=["auto", "superlu", "splu-default", "pardiso"],
                   help="sparse linear solver backend (default: [analysis] solver or auto)")
    from .generate.command import add_parser as add_new_parser
    add_new_parser(sub, _Parser)
    return p


def _positive(text: str) -> int:
    if not text.isdigit() or int(text) < 1:
        raise argparse.ArgumentTypeError(f"expected a positive integer, found {text!r}")
    return int(text)


def _study_options(s) -> None:
    s.add_argument("--workers", type=_positive, metavar="N", help="local processes for the studies (default: all cores)")
    s.add_argument("--scheduler", metavar="ADDRESS", help="run the studies on a Dask cluster (tcp://host:8786)")


def _fmt(x, unit, digits=4):
    return f"{x:.{digits}g} {unit}"


def cmd_check(args) -> int:
    from . import load_model
    model = load_model(args.case)
    spec = model.spec
    u = spec.units
    counts = {}
    for m in model.members:
        counts[m.type] = counts.get(m.type, 0) + 1
    weight = model.self_weight()
    print(f"case: {args.case}" + (f"  ({spec.title})" if spec.title else ""))
    print(f"units: length {u.length}, force {u.force}")
    print(f"nodes: {len(model.node_ids)} ({len(spec.nodes)} declared, "
          f"{len(model.node_ids) - len(spec.nodes)} inside divided members)")
    print("members: " + ", ".join(f"{n} {t}" for t, n in counts.items()) +
          f"; elements: {sum(len(t) for t in model.families.values())}")
    print(f"degrees of freedom: {model.ndof} ({int((~model.restrained).sum())} free)")
    print(f"total self-weight: {_fmt(weight / u.force_scale, u.force)}")
    print(f"supports: {len(spec.supports)} (" + ", ".join(
        f"{k}: {' '.join(d for d, on in zip(('x','y','z','rx','ry','rz'), v) if on)}"
        for k, v in list(spec.supports.items())[:8]) + (" …" if len(spec.supports) > 8 else "") + ")")
    print(f"load cases: {', '.join(model.load_cases) or 'none'}")
    runs = model.results_to_run()
    print(f"results to solve: {', '.join(n for n, _ in runs) or 'none'}")
    print(f"form-finding: {spec.shape.method if spec.shape else 'none'}")
    if spec.design is not None:
        d = spec.design
        print(f"design checks: on {', '.join(d.results)}; {len(d.size)} size group(s)"
              + (f"; PLACEHOLDER factors: {', '.join(d.placeholders)}" if d.placeholders else ""))
    for w in model.warnings:
        print(f"WARNING: {w}")
    return 0


def _summary(results, design=None) -> None:
    from .report.summary import summary_lines
    for line in summary_lines(results, design):
        print(line)


def _shape(case_path, shaped_path, solver=None, shown_as=None) -> bool:
    """Form-find ``case_path`` into ``shaped_path`` (+ cutting CSV); prints progress and targets.

    ``shown_as`` is the path printed for the shaped case (its final name when
    ``shaped_path`` is in a staging folder).  Returns False (after a message
    on stderr) when the shape was not found; nothing is written then.
    """
    from . import read_case
    from .errors import CaseError
    from .io.case_writer import write_shape_outputs
    from .solvers.formfind import ShapeError, find_shape
    spec = read_case(case_path)
    u = spec.units
    t0 = time.perf_counter()
    print(f"form-finding {case_path} ({spec.shape.method if spec.shape else 'no [shape] table'})")

    def progress(it, worst):
        print(f"  iteration {it}: largest target miss {_fmt(worst / u.length_scale, u.length)}", flush=True)

    try:
        found = find_shape(spec, linear_solver=solver, progress=progress)
    except CaseError as exc:
        raise exc if exc.file else exc.with_file(str(case_path)) from None
    except ShapeError as exc:
        print(f"cablefe: {case_path}: shape: {exc}", file=sys.stderr)
        return False
    header = (f"Shaped by cablefe {__version__} from {case_path}: node coordinates are the equilibrium\n"
              "under the permanent loads; length0 are the unstressed lengths that give it.\n"
              + ("[beam_reference] keeps the beams' stress-free geometry and their found rotations.\n"
                 if found.spec.beam_reference else "") + CAUTION)
    written = write_shape_outputs(shaped_path, found.spec, found.cutting, header)
    shown = Path(shown_as if shown_as is not None else shaped_path)
    print(f"shape found in {time.perf_counter() - t0:.2f} s"
          + (f", {found.iterations} iteration(s)" if found.targets else ""))
    for line in found.log:
        print(f"  {line}")
    if found.targets:
        print(f"  {'node':<12} {'axis':<4} {'target':>12} {'reached':>12} {'miss':>10}   ({u.length})")
        for t in found.targets:
            print(f"  {t.node:<12} {t.axis:<4} {t.target / u.length_scale:>12.6g} "
                  f"{t.reached / u.length_scale:>12.6g} {t.miss / u.length_scale:>10.2e}")
    print(f"  re-solved under the permanent loads it moves at most "
          f"{_fmt(found.largest_movement / u.length_scale, u.length)}")
    print(f"wrote {', '.join(str(shown.parent / Path(p).name) for p in written)}")
    return True


def cmd_shape(args) -> int:
    from .io.atomic import check_output_file
    from .io.case_writer import cutting_path, cutting_totals_path
    # before any work: a shaped case that cannot be written is a usage error
    check_output_file(args.output, "the shaped case")
    check_output_file(cutting_path(args.output), "the cutting table")
    check_output_file(cutting_totals_path(args.output), "the cutting totals")
    ok = _shape(args.case, args.output, args.solver)
    print("caution: " + CAUTION)
    return 0 if ok else 1


@contextlib.contextmanager
def _terminate_as_interrupt():
    """SIGTERM stops the run as Ctrl-C does, so that what was solved is still written."""
    if threading.current_thread() is not threading.main_thread():
        yield
        return

    def stop(signum, frame):
        raise KeyboardInterrupt

    old = signal.signal(signal.SIGTERM, stop)
    try:
        yield
    finally:
        signal.signal(signal.SIGTERM, old)


def _check_only(model, only, case) -> None:
    from .errors import CaseError
    if only is None:
        return
    known = [n for n, _ in model.results_to_run()]
    for name in only:
        if name not in known:
            raise CaseError("", f"--only {name}: no result of that name (known: {', '.join(known) or 'none'})",
                            str(case))


def cmd_solve(args, shape_first=False) -> int:
    from . import load_model, read_case, solve
    from .errors import CaseError
    from .io.atomic import ResultFolder
    from .io.results_io import write_result_files
    from .results import Results
    out = Path(args.output)
    # the output folder is checked before any work, and every input error is
    # found before anything is written (exit 2, the earlier set untouched)
    folder = ResultFolder(out).check()
    shaping = shape_first and read_case(args.case).shape is not None
    model = None
    if not shaping:
        model = load_model(args.case)
        _check_only(model, args.only, args.case)
    live = sys.stderr.isatty()

    def progress(name, lam, it):
        log.info("%s: load factor %.3f (%d iterations)", name, lam, it)
        if live:  # one updating line on a terminal; logs and pipes stay clean
            print(f"\r  solving {name}: load factor {lam:.3f}, {it} iterations ",
                  end="\n" if lam >= 1.0 else "", file=sys.stderr, flush=True)

    items, stopped, failure = [], False, None
    with _terminate_as_interrupt(), folder:
        case = args.case
        if shaping:
            staged = folder.staging / "shaped.toml"
            case = folder.final(staged)
            if not _shape(args.case, staged, args.solver, shown_as=case):
                folder.discard()
                print("caution: " + CAUTION)
                return 1
            model = load_model(staged)
            _check_only(model, args.only, args.case)
        t0 = time.perf_counter()
        try:
            solve(model, names=args.only, progress=progress, linear_solver=args.solver, on_result=items.append)
        except KeyboardInterrupt:
            stopped = True
        except CaseError:
            raise
        except Exception as exc:  # a result that raised: keep what was solved before it
            log.debug("solving failed", exc_info=True)
            failure = f"{type(exc).__name__}: {exc}"
        if live and (stopped or failure):
            print(file=sys.stderr)
        results = Results(model, tuple(items))
        wanted = None if args.only is None else set(args.only)
        missing = [n for n, _ in model.results_to_run() if (wanted is None or n in wanted)
                   and n not in set(results.names)]
        what = "interrupted" if stopped else "failed"
        if missing and not items:
            folder.discard()
            print(f"cablefe: {what} while solving {missing[0]}"
                  + (f" ({failure})" if failure else "") + f"; no result was solved, nothing written to {out}",
                  file=sys.stderr)
            print("caution: " + CAUTION)
            return 130 if stopped else 1
        extra = None
        if missing:
            extra = {"incomplete": {"reason": f"{what} while solving {missing[0]}"
                                    + (f": {failure}" if failure else ""), "not_solved": missing}}
        design = done = None
        modes_status = 0
        try:
            write_result_files(results, folder.staging, extra=extra)
            if shape_first and model.spec.studies and not missing:   # `run`: after the solve, before design
                from .studies.command import add_to_results, run_studies
                done = run_studies(results, folder.staging, workers=args.workers, scheduler=args.scheduler,
                                   solver=args.solver, progress_stream=sys.stderr if live else None)
                add_to_results(results, folder.staging, done)
            if shape_first and model.spec.modes is not None and not missing:
                # after solve, before design and report; written with the set
                staged_args = argparse.Namespace(**{**vars(args), "output": str(folder.staging)})
                modes_status = cmd_modes(staged_args, model, results, shown_folder=out)
            if shape_first:  # `run` adds design checks (and sizing), plots and a report
                from .report.html import write_report
                if not missing:   # no design verdict on part of the results
                    from .design.stage import design_stage
                    # envelopes of this run's studies, else those a `study` run left in OUT
                    design = design_stage(results, folder.staging, CAUTION, args.case, args.solver,
                                          read_from=None if done is not None else out)
                    if design is not None:
                        results = design.results
                        if done is not None:   # design rewrote results.json
                            add_to_results(results, folder.staging, done)
                write_report(results, folder.staging, case, CAUTION, design)
            written = folder.commit()
        except OSError as exc:
            folder.discard()
            print(f"cablefe: {out}: cannot write the results: {exc.strerror or exc}; the folder keeps its "
                  "earlier files", file=sys.stderr)
            return 2
    print(f"solved {len(results.items)} result(s) in {time.perf_counter() - t0:.2f} s")
    _summary(results, design)
    if done is not None:
        _study_summary(done, model.spec.units)
    print(f"wrote {', '.join(str(p) for p in written[:3])}" + (" …" if len(written) > 3 else ""))
    print("caution: " + CAUTION)
    converged = sum(r.converged for r in results.items)
    if missing:
        print(f"cablefe: {what} while solving {missing[0]}" + (f" ({failure})" if failure else "")
              + f"; wrote the {len(results.items)} result(s) solved before it ({converged} converged) "
              f"to {out}; not solved: {', '.join(missing)} (marked in results.json)", file=sys.stderr)
        return 130 if stopped else 1
    if done is not None and done.failed:
        print(f"cablefe: failed solves in studies: {', '.join(done.failed)} (marked in envelope.json)",
              file=sys.stderr)
        return 1
    if design is not None and not design.settled:
        print(f"cablefe: sizing: {design.outcome.sizing['message']} (see design.json)", file=sys.stderr)
        return 1
    if not results.all_converged:
        bad = [r.name for r in results.items if not r.converged]
        print(f"cablefe: not converged: {', '.join(bad)} (marked in results.json and in the meshes' field "
              "data; what converged is written)", file=sys.stderr)
        return 1
    if modes_status:
        return modes_status
    return 0


def cmd_modes(args, model=None, results=None, shown_folder=None) -> int:
    """Modes alone (``cablefe modes``) or as a step of ``run`` (model and results given).

    ``shown_folder``: the folder named in the printed paths (``run`` writes
    into a staging folder that is moved into place at the end).
    """
    from . import load_model
    from .io.modes_io import frequency_table
    from .vibration import ModesError, NotConverged, run_modes
    alone = model is None
    model = model or load_model(args.case)
    if alone and model.spec.modes is None:
        from .errors import CaseError
        raise CaseError("modes", "the case has no [modes] table").with_file(str(args.case))
    try:
        if alone:
            # added to the folder's set: the files of an earlier run stay
            from .io.atomic import ResultFolder
            folder = ResultFolder(Path(args.output), keep_others=True).check()
            with folder:
                found, staged = run_modes(model, folder.staging, results, args.solver)
                written = [folder.final(p) for p in staged]
        else:
            found, written = run_modes(model, Path(args.output), results, args.solver)
    except ModesError as exc:
        print(f"cablefe: {args.case}: modes: {exc}", file=sys.stderr)
        return 1 if isinstance(exc, NotConverged) else 2
    print("\n".join(frequency_table(found)))
    shown = written if shown_folder is None else [Path(shown_folder) / Path(p).name for p in written]
    print(f"wrote {', '.join(str(p) for p in shown)}")
    if alone:
        print("caution: " + CAUTION)
    return 0


def _study_summary(done, units) -> None:
    """One line per study; the summary's values are in the case's units."""
    for name, why in done.skipped:
        print(f"  study {name}: skipped, {why}")
    for name, s in done.summary.items():
        line = f"  study {name} ({s['kind']}): {s['solves']} solve(s)" + (f", {s['failed']} FAILED" if s["failed"] else "")
        if "largest_downward_displacement" in s:
            d = s["largest_downward_displacement"]
            line += f"; largest downward displacement {_fmt(-d['value'], units.length)} at {d['node']}"
        if "largest_tension" in s:
            line += f"; largest tension {_fmt(s['largest_tension']['value'], units.force)} in {s['largest_tension']['member']}"
        if s.get("slack_members"):
            line += f"; slack: {', '.join(s['slack_members'][:8])}" + (" …" if len(s["slack_members"]) > 8 else "")
        print(line)
        print(f"    envelope and governing patches: {s['folder']}/envelope.json")


def cmd_study(args) -> int:
    from .io.atomic import ResultFolder
    from .studies.command import study_case
    t0 = time.perf_counter()
    # one set: results.json (the base results and the studies' summary) and studies/
    folder = ResultFolder(Path(args.output)).check()
    with folder:
        results, done, staged = study_case(args.case, folder.staging, args.only, args.workers, args.scheduler,
                                           args.solver, sys.stderr if sys.stderr.isatty() else None)
        written = [folder.final(p) for p in staged]
    print(f"ran {len(done.summary)} study(ies) in {time.perf_counter() - t0:.2f} s")
    _study_summary(done, results.model.spec.units)
    print(f"wrote {', '.join(str(p) for p in written[:3])}" + (" …" if len(written) > 3 else ""))
    print("caution: " + CAUTION)
    if done.failed:
        print(f"cablefe: failed solves in studies: {', '.join(done.failed)} (marked in envelope.json)",
              file=sys.stderr)
        return 1
    return 0


def _check_options(args) -> None:
    """Options that name things the case or the machine may not have, checked before any work.

    Raises CaseError (key ``--solver`` or ``--only``) so that nothing is
    written for a mistyped name: ``run`` would otherwise shape (and write
    the shaped case) before finding it.
    """
    from .errors import CaseError
    from .io.case import solver_unavailable
    solver = getattr(args, "solver", None)
    if solver:
        problem = solver_unavailable(solver)
        if problem:
            raise CaseError("--solver", problem, str(args.case))
    only = getattr(args, "only", None)
    if only:
        from . import read_case
        spec = read_case(args.case)
        known = [c.name for c in spec.combinations] or list(spec.load_cases)
        unknown = [name for name in dict.fromkeys(only) if name not in known]
        if unknown:
            what = "combination" if spec.combinations else "load case (the case has no combinations)"
            raise CaseError("--only", f"no {what} named {', '.join(map(repr, unknown))} "
                            f"(known: {', '.join(known) or 'none'})", str(args.case))


def main(argv=None) -> int:
    """Run the command line; returns the exit status (0, 1 or 2, 130 on Ctrl-C)."""
    from .errors import CaseError
    from .studies.runner import RunnerError
    try:
        args = _parser().parse_args(argv)
    except UsageError as exc:
        print(str(exc), file=sys.stderr)
        return 2
    logging.basicConfig(level=logging.INFO if args.verbose else logging.WARNING,
                        format="%(levelname)s %(name)s: %(message)s")
    case = getattr(args, "case", None)
    try:
        if args.command in ("solve", "run", "shape"):
            _check_options(args)
        if args.command == "check":
            return cmd_check(args)
        if args.command == "solve":
            return cmd_solve(args)
        if args.command == "shape":
            return cmd_shape(args)
        if args.command == "modes":
            return cmd_modes(args)
        if args.command == "run":
            return cmd_solve(args, shape_first=True)
        if args.command == "study":
            return cmd_study(args)
        if args.command == "new":
            from .generate.command import run as cmd_new
            try:
                return cmd_new(args)
            except ValueError as exc:  # a bad parameter: the message names the option
                print(" ".join(f"cablefe new {args.family}: {exc}".split("\n")), file=sys.stderr)
                return 2
    except CaseError as exc:
        if exc.file is None and case is not None:
            exc = exc.with_file(str(case))
        print(f"cablefe: {exc}", file=sys.stderr)
        return 2
    except RunnerError as exc:
        print(f"cablefe: {exc}", file=sys.stderr)
        return 2
    except FileNotFoundError as exc:
        print(f"cablefe: {exc.filename}: file not found", file=sys.stderr)
        return 2
    except MemoryError:  # the size limit of the reader keeps ordinary cases well below this
        print(f"cablefe: {case}: not enough memory for this model on this machine", file=sys.stderr)
        return 2
    except BrokenPipeError:  # output piped into a pager or head that closed early
        sys.stderr.close()
        return 0
    except KeyboardInterrupt:
        print("cablefe: interrupted; no partial files were left under final names", file=sys.stderr)
        return 130
    return 2


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
