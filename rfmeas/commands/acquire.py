"""`rfmeas acquire` (one sweep from an instrument) and `rfmeas acquire-set` (a guided set)."""

from __future__ import annotations

from pathlib import Path
from typing import Optional

import typer

from rfmeas.errors import EXIT_INSTRUMENT, EXIT_INTERRUPTED, InputError, InstrumentError
from rfmeas.commands._common import (db_option, handles_errors, print_json, record_option, refuse_not_kept,
                                     stderr_console)

# Options both commands take (typer reads these definitions; it does not change them)
_SWEEP = typer.Option("100k:30M:201", "--sweep", help="START:STOP:POINTS, e.g. 100k:30M:201.")
_LOG = typer.Option(True, "--log/--linear", help="Logarithmic (default) or linear spacing.")
_BACKEND = typer.Option("@py", "--backend", help="pyvisa backend ('@py' pure Python, '@ivi' vendor, '@sim').")
_TIMEOUT = typer.Option(None, "--timeout", min=1, help="Reply timeout in ms (default: the profile's).")
_RETRIES = typer.Option(None, "--retries", min=0, help="Retries of a timed-out reading (default: the profile's).")
_PROFILES_DIR = typer.Option(None, "--profiles-dir", envvar="RFMEAS_PROFILES",
                             help="Folder of extra instrument profiles (*.toml); also RFMEAS_PROFILES.")
_RESOURCE_HELP = "VISA resource name, or 'sim' for the simulated instrument."
_PROFILE_HELP = "Instrument profile name or .toml file."


def _parse_fault(text: Optional[str]):
    from rfmeas.instruments.simulation import SimFaults

    if not text:
        return SimFaults()
    kind, _, index = text.partition("@")
    if kind not in ("silent", "garbage") or not index.isdigit():
        raise InputError(f"--sim-fault '{text}' must be silent@N or garbage@N (N = reading number from 0)")
    return SimFaults(silent_from=int(index)) if kind == "silent" else SimFaults(garbage_at=int(index))


def _connector(resource: str, backend: str, profile, timeout_ms: Optional[int], sim_fault: Optional[str]):
    """A function (plan, wiring) -> Session: the simulation is rebuilt per sweep and wiring."""
    from rfmeas.instruments import open_session
    from rfmeas.instruments.simulation import SIM_RESOURCE, SIM_TIMEOUT_MS, open_simulated_session

    if resource == SIM_RESOURCE:
        faults = _parse_fault(sim_fault)
        return lambda plan, wiring: open_simulated_session(profile, plan, wiring, faults=faults,
                                                           timeout_ms=timeout_ms or SIM_TIMEOUT_MS)
    if sim_fault:
        raise InputError("--sim-fault only applies to --resource sim")
    return lambda plan, wiring: open_session(resource, backend, timeout_ms or profile.timeout_ms,
                                             profile.read_termination, profile.write_termination)


def _measure(connect, profile, plan, wiring, output: Path, retries: Optional[int], label: str,
             overwrite: bool = False):
    """One sweep with a progress bar on stderr; returns the AcquisitionResult."""
    from rich.progress import BarColumn, MofNCompleteColumn, Progress, TextColumn, TimeRemainingColumn

    from rfmeas.instruments import Instrument, acquire

    session = connect(plan, wiring)
    try:
        columns = (TextColumn("{task.description}"), BarColumn(), MofNCompleteColumn(), TimeRemainingColumn())
        with Progress(*columns, console=stderr_console()) as progress:
            task = progress.add_task(label, total=None)
            return acquire(Instrument(session, profile, retries), plan, output,
                           on_progress=lambda done, total: progress.update(task, completed=done, total=total),
                           comments=[f"resource: {session.resource_name}"], overwrite=overwrite)
    finally:
        session.close()


def _list(backend: str, profiles_dir, as_json: bool) -> None:
    from rfmeas.instruments import available_profiles, list_resources

    profiles = available_profiles(profiles_dir)
    resources = list_resources(backend)
    if as_json:
        print_json({"backend": backend, "resources": list(resources),
                    "profiles": [{"name": p.name, "kind": p.kind, "description": p.description, "path": p.path}
                                 for p in profiles.values()]})
        return
    typer.echo(f"Resources ({backend}):")
    for name in resources:
        typer.echo(f"  {name}")
    if not resources:
        typer.echo("  none found (check cables, power, drivers and udev rules)")
    typer.echo("  sim  (built-in simulated instrument)")
    typer.echo("Profiles:")
    for p in profiles.values():
        typer.echo(f"  {p.name}  [{p.kind}]  {p.description}")


def register(app: typer.Typer) -> None:
    @app.command("acquire")
    @handles_errors
    def acquire_command(
        output: Optional[Path] = typer.Option(None, "--output", "-o", help="Touchstone file to write (.s1p or .s2p)."),
        resource: Optional[str] = typer.Option(None, "--resource", "-r", help=_RESOURCE_HELP),
        profile_name: Optional[str] = typer.Option(None, "--profile", "-p", help=_PROFILE_HELP),
        sweep: str = _SWEEP,
        log_spacing: bool = _LOG,
        list_only: bool = typer.Option(False, "--list", help="List VISA resources and instrument profiles."),
        backend: str = _BACKEND,
        timeout_ms: Optional[int] = _TIMEOUT,
        retries: Optional[int] = _RETRIES,
        profiles_dir: Optional[Path] = _PROFILES_DIR,
        sim_port1: str = typer.Option("primary", "--sim-port1", help="Simulation: winding on port 1."),
        sim_termination: str = typer.Option("open", "--sim-termination",
                                            help="Simulation: the other winding open, short or a resistance in ohms."),
        sim_fault: Optional[str] = typer.Option(None, "--sim-fault",
                                                help="Simulation: stage a fault, silent@N or garbage@N."),
        overwrite: bool = typer.Option(False, "--overwrite", help="Measure anew into an existing file; the "
                                       "earlier one is kept as NAME.previous-TIME.s1p."),
        as_json: bool = typer.Option(False, "--json", help="Print the result as JSON on stdout."),
    ):
        """Take one sweep from an LCR meter or VNA and write it to Touchstone as it goes."""
        if list_only:
            _list(backend, profiles_dir, as_json)
            return
        missing = [flag for flag, value in (("--resource", resource), ("--profile", profile_name),
                                            ("--output", output)) if not value]
        if missing:
            raise InputError(f"acquire needs {', '.join(missing)} (or --list)")
        from rfmeas.instruments import load_profile, parse_sweep
        from rfmeas.instruments.simulation import Wiring
        from rfmeas.instruments.touchstone_stream import check_free, ports_for

        profile = load_profile(profile_name, profiles_dir)
        plan = parse_sweep(sweep, log_spacing)
        wiring = Wiring(sim_port1, sim_termination, ports_for(output))
        connect = _connector(resource, backend, profile, timeout_ms, sim_fault)
        check_free(output, overwrite)
        try:
            result = _measure(connect, profile, plan, wiring, output, retries, output.name, overwrite)
        except KeyboardInterrupt as exc:
            kept = getattr(exc, "kept", None)
            stderr_console().print("interrupted; " + (f"the readings taken so far are in {kept}" if kept else
                                                      "no reading was taken, so no data were written"),
                                   markup=False)
            raise typer.Exit(EXIT_INTERRUPTED) from None
        if as_json:
            print_json(result)
        else:
            kept = f"; the earlier file is kept as {result.previous}" if result.previous else ""
            stderr_console().print(f"wrote {result.path} ({result.points} points from {result.identity}){kept}",
                                   markup=False)

    @app.command("acquire-set")
    @handles_errors
    def acquire_set_command(
        manifest: Path = typer.Argument(..., help="Manifest (TOML) to write; the sweeps go beside it."),
        resource: str = typer.Option(..., "--resource", "-r", help=_RESOURCE_HELP),
        profile_name: str = typer.Option(..., "--profile", "-p", help=_PROFILE_HELP),
        sweep: str = _SWEEP,
        log_spacing: bool = _LOG,
        name: Optional[str] = typer.Option(None, "--name", help="Transformer name (asked when not given)."),
        backend: str = _BACKEND,
        timeout_ms: Optional[int] = _TIMEOUT,
        retries: Optional[int] = _RETRIES,
        profiles_dir: Optional[Path] = _PROFILES_DIR,
        overwrite: bool = typer.Option(False, "--overwrite", help="Measure anew over an existing manifest and its "
                                       "sweeps; the earlier files are kept as NAME.previous-TIME.EXT."),
        analyze: Optional[bool] = typer.Option(None, "--analyze/--no-analyze",
                                               help="Analyse at the end without asking (default: ask)."),
        as_json: bool = typer.Option(False, "--json", help="Print the session summary as JSON on stdout."),
        record: bool = record_option("the analysis at the end"),
        db: Optional[Path] = db_option(),
    ):
        """Guided session: walks through each sweep of a measurement set and writes the manifest."""
        from rfmeas.instruments import load_profile, parse_sweep
        from rfmeas.instruments.guided import default_plan, manifest_text

        if manifest.suffix.lower() != ".toml":
            raise InputError("the manifest must be a .toml file", path=manifest)
        if manifest.exists() and not overwrite:
            raise InputError("already exists; pass --overwrite to measure anew (the earlier files are then "
                             "kept as NAME.previous-TIME.EXT)", path=manifest)
        profile = load_profile(profile_name, profiles_dir)
        existing = [step.file for step in default_plan(profile.kind) if (manifest.parent / step.file).exists()]
        if existing and not overwrite:
            raise InputError(f"the folder holds sweeps already ({', '.join(existing)}); pass --overwrite to "
                             "measure anew (the earlier files are then kept as NAME.previous-TIME.EXT)",
                             path=manifest.parent)
        plan = parse_sweep(sweep, log_spacing)
        connect = _connector(resource, backend, profile, timeout_ms, None)
        folder = manifest.parent
        folder.mkdir(parents=True, exist_ok=True)
        err = stderr_console()

        if name is None:
            name = typer.prompt("Transformer name", default=manifest.stem, err=True)
        turns = [_ask_turns(winding) for winding in ("primary", "secondary")]
        steps = default_plan(profile.kind)
        err.print(f"{len(steps)} sweeps, {plan.describe()}. Keep the leads short and the same for every sweep.")
        taken, last_error, interrupted = _walk(steps, lambda step: _measure(
            connect, profile, plan, step.wiring, folder / step.file, retries, step.file, overwrite),
            profile.kind, err)

        if not taken:
            if interrupted:
                raise typer.Exit(EXIT_INTERRUPTED)
            if last_error is not None:
                raise last_error
            raise InputError("no sweep was taken; nothing written", path=manifest)
        from rfmeas.instruments.touchstone_stream import keep_aside
        from rfmeas.io.atomic import atomic_write_text

        keep_aside(manifest, leave_in_place=True)
        atomic_write_text(manifest, manifest_text(name, taken, *turns, comment=f"written by rfmeas "
                                                  f"acquire-set ({profile.name})"))
        err.print(f"\nwrote {manifest} with {len(taken)} of {len(steps)} sweeps", markup=False)
        if interrupted:
            err.print("interrupted; the manifest lists the sweeps finished so far")
            raise typer.Exit(EXIT_INTERRUPTED)
        summary = {"manifest": str(manifest), "sweeps": [s.to_dict() for s in taken], "analysis": None,
                   "record_id": None}
        if analyze is None:
            analyze = typer.confirm("Analyse the measurement set now?", default=True, err=True)
        not_kept = None
        if analyze:
            summary["analysis"], summary["record_id"], not_kept = _analyze(manifest, err, record, db)
        if as_json:
            print_json(summary)
        if not_kept is not None:
            refuse_not_kept(not_kept)
        if last_error is not None:
            raise typer.Exit(EXIT_INSTRUMENT)


def _walk(steps, measure, kind: str, err):
    """Prompt through `steps`, measuring each on Enter; returns (taken, last error, interrupted).

    Ctrl-C or the end of input stops the walk but keeps what was taken, so the
    manifest can still list it.
    """
    taken, last_error = [], None
    try:
        for number, step in enumerate(steps, 1):
            err.print(f"\n[bold]Sweep {number} of {len(steps)}: {step.file}[/]")
            err.print(step.instruction(kind))
            answer = typer.prompt("Press Enter to measure, s to skip, q to stop", default="",
                                  show_default=False, err=True).strip().lower()
            while answer not in ("s", "q"):
                try:
                    measure(step)
                    taken.append(step)
                    last_error = None
                    break
                except InstrumentError as exc:
                    last_error = exc
                    err.print(f"[red]measurement failed:[/] {exc}")
                    answer = typer.prompt("r to retry, s to skip, q to stop", default="r", err=True).strip().lower()
            if answer == "q":
                break
    except (KeyboardInterrupt, typer.Abort) as exc:
        kept = getattr(exc, "kept", None)
        if kept is not None:
            err.print(f"the readings of the interrupted sweep are in {kept}", markup=False)
        return taken, last_error, True
    return taken, last_error, False


def _ask_turns(winding: str) -> Optional[int]:
    while True:
        text = typer.prompt(f"{winding.capitalize()} turns (Enter if unknown)", default="", show_default=False,
                            err=True).strip()
        if not text:
            return None
        if text.isdigit() and int(text) > 0:
            return int(text)
        stderr_console().print("turns must be a whole number above 0")


def _analyze(manifest: Path, err, record: bool = False, db: Optional[Path] = None):
    """Run the analysis if this installation has it; print the headline figures. With `record`,
    keep it in the history store as `analyze` does. Returns (result dict, record id, the store's
    error when it could not be kept)."""
    try:
        from rfmeas.analysis import analyze_manifest
    except ImportError:
        err.print("analysis is unavailable in this installation; run `rfmeas analyze` on the manifest later")
        return None, None, None
    from rfmeas.units import format_with_error

    analysis = analyze_manifest(manifest)
    record_id, not_kept = None, None
    if record:  # the figures are still shown when the store fails; the store's problem ends the run
        from rfmeas.history.store import keep_analysis

        record_id, not_kept = keep_analysis(analysis, db)
    result = analysis.to_dict()
    parameters = result.get("parameters", {})
    for key, label, unit in (("primary_inductance_H", "primary inductance", "H"),
                             ("secondary_inductance_H", "secondary inductance", "H"),
                             ("coupling_coefficient", "coupling coefficient", ""),
                             ("leakage_inductance_H", "leakage inductance", "H")):
        if key in parameters:
            value = parameters[key]
            err.print(f"{label}: {format_with_error(value.get('value'), value.get('stderr'), unit)}")
    if record_id is not None:
        err.print(f"[dim]recorded in the history as @{record_id}[/]")
    return result, record_id, not_kept
