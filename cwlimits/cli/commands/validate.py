"""``cwlimits validate``: the sensitivity model against a simulated injection campaign."""

import math

from cwlimits._defaults import (
    DEFAULT_CAMPAIGN_CHUNK,
    DEFAULT_START,
    PLOT_SUFFIXES,
    default_for,
)
from cwlimits.cli.commands._common import (
    add_noise_args,
    add_parser,
    add_target_args,
    check_output_path,
    echo,
    format_assumptions,
    format_rows,
    quantity_arg,
    resolve_noise_args,
    resolve_target,
    sci,
    seed_arg,
)
from cwlimits.cli.commands._execution import (
    add_executor_args,
    execution_config,
    executor_from_args,
    progress_from_args,
)
from cwlimits.errors import InputError

__all__ = ["ORDER", "register", "run"]


ORDER = 80


_EXAMPLES = [
    "cwlimits validate --catalogue target_lists/demo.csv --target 'Fict Ember' "
    "--setup search.toml --injections 200",
    "cwlimits validate --catalogue target_lists/demo.csv --target 'Fict Quill' "
    "--setup search.toml --injections 500 --workers 2 --out campaign.ecsv "
    "--plot campaign.png --seed 7",
    "cwlimits validate --catalogue cat.csv --target A --setup search.toml "
    "--frequency 150Hz --noise my_asd.csv --h0 2e-26 4e-26 8e-26",
    "cwlimits validate --catalogue cat.csv --target A --setup search.toml --n-seg 1 "
    "--t-seg 2day --templates 64 --band-width 2mHz --false-alarm 0.001",
    "cwlimits validate --catalogue target_lists/demo.csv --target 'Fict Ember' "
    "--setup plan.toml --mock-search --injections 60 --duty-factor 0.8 --out mock.ecsv "
    "--plot mock.png --mismatch-plot mismatch.png --seed 3 --workers 2",
]


def register(subparsers, common):
    """Add the ``validate`` subcommand."""
    parser = add_parser(
        subparsers, common, "validate",
        help="check the sensitivity model with simulated injections and searches",
        description="Simulate the setup's segments (length, number, detectors) in a narrow "
                    "band at one frequency, inject signals of several amplitudes h0 with "
                    "random orientation into fresh Gaussian noise at the target's sky "
                    "position, search a small band of templates with the StackSlide "
                    "F-statistic, count detections above the model's false-alarm "
                    "threshold, and compare the measured detection efficiency (with "
                    "binomial intervals) with the model's prediction: h0 at the chosen "
                    "confidence, measured and predicted.  No Doppler modulation is "
                    "simulated (detector-frame phase), no spin-down and no gaps.",
        examples=_EXAMPLES)
    add_target_args(parser)
    parser.add_argument("--setup", metavar="FILE", required=True,
                        help="TOML setup file (segments, detectors, band)")
    grp = parser.add_argument_group("setup (override the file)")
    grp.add_argument("--t-seg", type=quantity_arg("d", "segment length"), metavar="T",
                     help="coherent segment length (e.g. 2day)")
    grp.add_argument("--n-seg", type=int, metavar="N", help="number of segments")
    grp.add_argument("--detectors", metavar="LIST", help="comma-separated site codes")
    sim = parser.add_argument_group("simulation")
    sim.add_argument("--injections", type=int, default=200, metavar="N",
                     help="injections per h0 value (default 200)")
    sim.add_argument("--h0", type=float, nargs="+", metavar="H",
                     help="injected amplitudes (default: --h0-steps values from 0.5 to 2 "
                          "times the predicted h0 at the confidence, log-spaced)")
    sim.add_argument("--h0-span", type=float, nargs=2, default=(0.5, 2.0),
                     metavar=("LOW", "HIGH"),
                     help="default grid: factors of the predicted h0 (default 0.5 2)")
    sim.add_argument("--h0-steps", type=int, default=8, metavar="K",
                     help="default grid: number of amplitudes (default 8)")
    sim.add_argument("--frequency", type=quantity_arg("Hz", "frequency"), metavar="F",
                     help="centre of the simulated band (default: the middle of the "
                          "setup's band)")
    sim.add_argument("--band-width", type=quantity_arg("Hz", "band width"), metavar="B",
                     help="width of the simulated band = complex sample rate, rounded up to "
                          "a power of two of samples per segment (default: the narrowest "
                          "with >= 64 samples per segment and one per 30 min)")
    sim.add_argument("--templates", type=int, default=32, metavar="N",
                     help="frequency templates searched, Fourier bins 1/T_seg (default 32)")
    add_noise_args(sim, per_detector=False)
    sim.add_argument("--start", default=DEFAULT_START,
                     help=f"start of the data, UTC (default {DEFAULT_START})")
    sim.add_argument("--seed", type=seed_arg, metavar="N",
                     help="random seed (default: fresh; recorded in the output)")
    st = parser.add_argument_group("statistics")
    st.add_argument("--confidence", type=float, default=default_for("validate", "confidence"),
                    help="detection probability at which h0 is reported (default "
                         f"{default_for('validate', 'confidence')}; docs/defaults.md)")
    st.add_argument("--false-alarm", type=float, default=0.01,
                    help="false-alarm probability over the searched templates (default "
                         "0.01)")
    st.add_argument("--interval", type=float, default=0.95,
                    help="coverage of the binomial intervals (default 0.95)")
    mock = parser.add_argument_group(
        "mock search (--mock-search: the directed search of the plan itself, with Doppler, "
        "spin-down, off-grid signals, gaps and the plan's lattice banks)")
    mock.add_argument("--mock-search", action="store_true",
                      help="run the mock-search campaign on the setup (a plan of "
                           "'cwlimits plan') instead of the amplitude-only campaign")
    mock.add_argument("--duty-factor", type=float, default=None, metavar="D",
                      help="duty factor of the simulated data, random gaps (default: the "
                           "setup's duty_factor)")
    mock.add_argument("--noise-runs", type=int, default=100, metavar="N",
                      help="noise-only searches for the false-alarm check (default 100)")
    mock.add_argument("--mismatch-runs", type=int, default=100, metavar="N",
                      help="noise-free injections for the mismatch check (default 100)")
    mock.add_argument("--box-width", type=quantity_arg("Hz", "box width"), default=None,
                      metavar="W", help="searched frequency box (default 4 mHz)")
    mock.add_argument("--fdot-range", nargs=2, type=quantity_arg("Hz/s", "spin-down"),
                      metavar=("LO", "HI"),
                      help="searched spin-down range, Hz/s (quote a negative value with its "
                           "unit: '-5e-9 Hz/s' '0 Hz/s'; default: the plan's age-based "
                           "space at the band centre, the target's age and the setup's "
                           "braking indices)")
    mock.add_argument("--fddot-range", nargs=2, type=quantity_arg("Hz/s2", "second "
                                                                   "spin-down derivative"),
                      metavar=("LO", "HI"),
                      help="searched second derivative, Hz/s^2 ('0 Hz/s2' '0 Hz/s2': a "
                           "search in (f, fdot) only; default: the plan's space where its "
                           "template count resolves fddot, else none)")
    mock.add_argument("--mismatch-plot", metavar="FILE",
                      help="histogram of the loudest-template mismatch against the model")
    out = parser.add_argument_group("output")
    out.add_argument("--out", metavar="FILE",
                     help="table per h0 (.csv, .ecsv or .tex); finished chunks are kept in "
                          "cwlimits-store.sqlite beside it, so a rerun resumes")
    out.add_argument("--plot", metavar="FILE",
                     help="efficiency against h0 with the model curve (.png, .svg, .pdf)")
    add_executor_args(parser, chunk_size=DEFAULT_CAMPAIGN_CHUNK)
    parser.set_defaults(run=run)


def _check_numbers(args):
    """Refuse bad counts, amplitudes and probabilities before any work."""
    from cwlimits._sizes import check_size

    for name, value in (("--injections", args.injections), ("--templates", args.templates)):
        if value < 1:
            raise InputError(f"{name} must be at least 1", value=value)
    if args.h0 is not None:
        bad = [h for h in args.h0 if not (math.isfinite(h) and h > 0)]
        if bad:
            raise InputError("--h0: injected amplitudes must be positive and finite "
                             "(dimensionless strain, e.g. 3e-25)", value=bad[0])
    else:
        low, high = args.h0_span
        if not (0 < low < high and math.isfinite(high)):
            raise InputError("--h0-span needs 0 < LOW < HIGH", value=list(args.h0_span))
        if args.h0_steps < 2:
            raise InputError("--h0-steps must be at least 2", value=args.h0_steps)
    from cwlimits._units import fraction

    for name, value in (("--confidence", args.confidence),
                        ("--false-alarm", args.false_alarm), ("--interval", args.interval)):
        fraction(value, name)
    if args.seed is not None and args.seed < 0:
        raise InputError("--seed must be a non-negative integer", value=args.seed)
    steps = len(args.h0) if args.h0 is not None else args.h0_steps
    check_size("injections", args.injections * steps,
               f"--injections {args.injections} at {steps} h0 values")
    check_size("templates", args.templates, f"--templates {args.templates}")


def _setup(args):
    from cwlimits.searchspace.searchsetup import load_setup

    setup = load_setup(args.setup)
    changes = {}
    if args.t_seg is not None:
        changes["t_seg"] = args.t_seg
    if args.n_seg is not None:
        changes["n_seg"] = args.n_seg
    if args.detectors is not None:
        changes["detectors"] = tuple(d.strip() for d in args.detectors.split(",")
                                     if d.strip())
    if changes:
        if "t_seg" in changes or "n_seg" in changes:
            changes.update(mid_times=None, span=None)
        try:
            setup = setup.replace(**changes)
        except InputError as exc:
            field = getattr(exc, "field", None)
            if field is None:
                raise
            raise InputError(f"--{field.replace('_', '-')}: {exc.short}",
                             value=exc.value) from None
    return setup


def _frequency(args, setup, band_hz):
    import astropy.units as u


    f_min, f_max = setup.f_min.to_value(u.Hz), setup.f_max.to_value(u.Hz)
    f = 0.5 * (f_min + f_max) if args.frequency is None else args.frequency.to_value(u.Hz)
    half = 0.5 * band_hz
    if not (f_min + half <= f <= f_max - half):
        raise InputError(f"--frequency: the simulated band {f:.9g} Hz +- {half:.3g} Hz must "
                         f"lie inside the setup's band {f_min:g}-{f_max:g} Hz",
                         file=args.setup, value=f"{f:.9g} Hz")
    return f


def run(args):
    """Run ``cwlimits validate``."""
    if args.mock_search:
        return _run_mock(args)
    import astropy.units as u
    import numpy as np

    from cwlimits._time import gps_seconds
    from cwlimits.runtime.store import file_hash, open_store
    from cwlimits.simulation.campaigns import (
        injection_campaign,
        plot_efficiency,
        simulation_layout,
    )
    from cwlimits.tables import write_table

    out = check_output_path(args.out)
    plot = check_output_path(args.plot, PLOT_SUFFIXES, "--plot")
    resolve_noise_args(args, per_detector=False)
    _check_numbers(args)
    target = resolve_target(args)
    setup = _setup(args)
    n_det, n_seg, t_seg = setup.n_detectors, setup.n_seg, setup.t_seg
    m, band = simulation_layout(t_seg, n_det, n_seg, args.templates, args.band_width)
    f_hz = _frequency(args, setup, band.to_value(u.Hz))
    source = args.noise
    psd = source.psd(f_hz * u.Hz).to(u.Hz**-1)
    start_s = gps_seconds(args.start)
    h0_values = None if args.h0 is None else np.asarray(args.h0, dtype=float)

    coord = target.coord
    # a noise file enters the configuration by its content (a model name wins over a file)
    noise_id = args.noise_id
    config = {"command": "validate", "catalogue": file_hash(args.catalogue),
              "target": target.name, "ra_deg": float(coord.icrs.ra.deg),
              "dec_deg": float(coord.icrs.dec.deg), "setup": file_hash(args.setup),
              "t_seg_s": float(t_seg.to_value(u.s)), "n_seg": n_seg,
              "detectors": list(setup.detectors), "frequency_hz": f_hz,
              "band_hz": float(band.to_value(u.Hz)), "noise": noise_id,
              "psd": float(psd.value), "h0": None if h0_values is None else
              h0_values.tolist(), "h0_span": list(args.h0_span), "h0_steps": args.h0_steps,
              "injections": args.injections, "templates": args.templates,
              "false_alarm": args.false_alarm, "confidence": args.confidence,
              "start_gps_s": start_s, "seed": args.seed, **execution_config(args)}
    n_h0 = args.h0_steps if h0_values is None else h0_values.size
    folder = out.parent if out is not None else (plot.parent if plot is not None else None)
    store = open_store(folder) if folder is not None else None
    try:
        key = None
        if args.seed is not None:
            seed = np.random.SeedSequence(args.seed)
        else:
            seed = np.random.SeedSequence()
        if store is not None:
            run_id = store.begin_run(config)
            key = (run_id, target.name)
            # the recorded seed of a resumed run (fresh entropy only for a new run)
            seed = store.begin_part(run_id, target.name, n_items=n_h0 * args.injections,
                                    chunk_size=args.chunk_size, seed=seed,
                                    seed_given=args.seed is not None)
        with executor_from_args(args) as executor:
            result = injection_campaign(
                coord, detectors=",".join(setup.detectors), psd=psd, f_ref=f_hz * u.Hz,
                bandwidth=band, t_seg=t_seg, n_seg=n_seg, start=start_s * u.s,
                h0_values=h0_values, n_injections=args.injections,
                false_alarm=args.false_alarm, n_search_bins=args.templates,
                confidence=args.confidence, interval=args.interval, rng=seed,
                executor=executor, store=store, key=key, chunk_size=args.chunk_size,
                progress=progress_from_args(args),
                h0_grid=(args.h0_span[0], args.h0_span[1], args.h0_steps))
    finally:
        if store is not None:
            store.close()

    seed_text = str(args.seed) if args.seed is not None else f"{seed.entropy} (drawn)"
    assumptions = dict(result.assumptions)
    assumptions.update({
        "target": f"{target.name} of {args.catalogue} (RA {coord.icrs.ra.deg:.6f} deg, "
                  f"Dec {coord.icrs.dec.deg:.6f} deg)",
        "setup": f"{args.setup}: {n_seg} x {t_seg} segments, {','.join(setup.detectors)}",
        "noise_source": f"{source.name}, PSD at {f_hz:.6g} Hz taken flat over the "
                        "simulated band",
        "seed": seed_text,
    })
    table = result.table
    ratio = result.h0_measured / result.h0_predicted
    low, high = result.h0_measured_range
    pct = f"{100 * args.confidence:g}"
    table.meta.update({
        "title": f"injection campaign for {target.name}", "target": target.name,
        "frequency_hz": f_hz,
        "band_width_hz": float(result.bandwidth.to_value(u.Hz)),
        "t_seg_s": float(t_seg.to_value(u.s)), "n_seg": n_seg,
        "confidence": args.confidence,
        "h0_measured": result.h0_measured, "h0_measured_low": low,
        "h0_measured_high": high, "h0_predicted": result.h0_predicted,
        "measured_over_predicted": ratio, "threshold_2F_sum": result.threshold,
        "n_templates": result.n_templates, "false_alarms": result.false_alarms,
        "false_alarms_expected": result.false_alarms_expected,
        "false_alarm_injections": result.false_alarm_injections, "seed": seed_text})
    title = (f"injection campaign for {target.name}: measured vs predicted detection "
             f"efficiency and h0 at {pct} %")
    _summarise(args, result, target, setup, f_hz, psd, seed_text)
    echo(args)
    echo(args, format_assumptions(assumptions))
    if out is not None:
        write_table(table, out, title=title, assumptions=assumptions)
        echo(args, f"wrote {out}")
    if plot is not None:
        from cwlimits.plotting.figures import save_figure

        save_figure(plot_efficiency(result, title=target.name), plot,
                    formats=(plot.suffix.lstrip("."),))
        echo(args, f"wrote {plot}")
    return 0


def _summarise(args, result, target, setup, f_hz, psd, seed_text):
    import astropy.units as u
    import numpy as np


    b_hz = result.bandwidth.to_value(u.Hz)
    echo(args, f"injection campaign for {target.name}: {setup.n_seg} x {setup.t_seg} "
               f"segments, {','.join(setup.detectors)}; simulated band {f_hz:.6g} Hz "
               f"+- {b_hz / 2:.3g} Hz ({result.n_samples} samples per segment), PSD "
               f"{sci(psd.value)} 1/Hz; seed {seed_text}")
    echo(args, f"search: {result.n_templates} templates, threshold 2F_sum > "
               f"{result.threshold:.4g} (false alarm {args.false_alarm:g}); "
               f"{args.injections} injections per h0")
    iv = f"{100 * result.interval:g} % interval"
    rows = [[sci(r["h0"].value), f"{int(r['n_detected'])}/{int(r['n_injections'])}",
             f"{r['efficiency'].value:.3f}",
             f"{r['ci_low'].value:.3f}-{r['ci_high'].value:.3f}",
             f"{r['predicted'].value:.3f}",
             "-" if not np.isfinite(r["z"].value) else f"{r['z'].value:+.2f}"]
            for r in result.table]
    echo(args, format_rows(["h0 [strain]", "detected", "efficiency", iv, "predicted",
                            "z [sigma]"], rows))
    pct = f"{100 * result.confidence:g}"
    low, high = result.h0_measured_range
    pred = result.h0_predicted
    echo(args, f"h0 at {pct} % detection: measured {sci(result.h0_measured)} ({iv}: "
               f"{sci(low)} to {sci(high)}), predicted {sci(pred)}; measured/predicted = "
               f"{result.h0_measured / pred:.3f} ({low / pred:.3f} to {high / pred:.3f})")
    if result.false_alarms_expected > 0:
        echo(args, f"false alarms: {result.false_alarms} threshold crossings by templates "
                   f"beyond the injections' sidereal sidebands (expected "
                   f"{result.false_alarms_expected:.3g} from the per-template false alarm)")
    else:
        echo(args, "false-alarm check: no searched template lies beyond the injections' "
                   "sidereal sidebands (4 per sidereal day); give more --templates to "
                   "check the false-alarm rate")


def _run_mock(args):
    """``cwlimits validate --mock-search``: the mock-search campaign of a plan."""
    import astropy.units as u
    import numpy as np

    from cwlimits._sizes import check_size
    from cwlimits.runtime.store import file_hash, open_store
    from cwlimits.simulation.mockcampaign import bank_size, mock_campaign
    from cwlimits.tables import write_table

    out = check_output_path(args.out)
    plot = check_output_path(args.plot, PLOT_SUFFIXES, "--plot")
    mplot = check_output_path(args.mismatch_plot, PLOT_SUFFIXES, "--mismatch-plot")
    _check_numbers(args)
    for name, value in (("--noise-runs", args.noise_runs),
                        ("--mismatch-runs", args.mismatch_runs)):
        if value < 1:
            raise InputError(f"{name} must be at least 1", value=value)
    target = resolve_target(args)
    setup = _setup(args)
    duty = setup.duty_factor if args.duty_factor is None else args.duty_factor
    if not 0 < duty <= 1:
        raise InputError("--duty-factor must lie in (0, 1]", value=duty)
    low, high = args.h0_span
    factors = (np.asarray(args.h0, float) if args.h0 is not None
               else np.geomspace(low, high, args.h0_steps))
    n_items = args.noise_runs + args.mismatch_runs + factors.size * args.injections
    check_size("injections", n_items, f"--injections {args.injections} and the check runs")
    box = 0.004 * u.Hz if args.box_width is None else args.box_width
    band = 0.0625 * u.Hz if args.band_width is None else args.band_width
    fdot_box, fddot_box = _spin_boxes(args, setup, target)
    _check_reach(setup, box, band, fdot_box, fddot_box)
    check_size("mock_templates", bank_size(setup, box, fdot_box, fddot_box),
               f"--box-width {box:g}, --fdot-range {_show(fdot_box)}, --fddot-range "
               f"{_show(fddot_box)} over the lattice spacings")
    coord = target.coord
    config = {"command": "validate --mock-search", "catalogue": file_hash(args.catalogue),
              "target": target.name, "ra_deg": float(coord.icrs.ra.deg),
              "dec_deg": float(coord.icrs.dec.deg), "setup": file_hash(args.setup),
              "t_seg_s": float(setup.t_seg.to_value(u.s)), "n_seg": setup.n_seg,
              "detectors": list(setup.detectors), "duty": duty,
              "box_hz": float(box.to_value(u.Hz)), "band_hz": float(band.to_value(u.Hz)),
              "fdot_box": _show(fdot_box), "fddot_box": _show(fddot_box),
              "h0_factors": factors.tolist(), "injections": args.injections,
              "noise_runs": args.noise_runs, "mismatch_runs": args.mismatch_runs,
              "false_alarm": args.false_alarm, "confidence": args.confidence,
              "seed": args.seed, **execution_config(args)}
    folder = next((p.parent for p in (out, plot, mplot) if p is not None), None)
    store = open_store(folder) if folder is not None else None
    seed = np.random.SeedSequence(args.seed) if args.seed is not None else \
        np.random.SeedSequence()
    try:
        key = None
        if store is not None:
            run_id = store.begin_run(config)
            key = (run_id, target.name)
            seed = store.begin_part(run_id, target.name, n_items=n_items,
                                    chunk_size=args.chunk_size, seed=seed,
                                    seed_given=args.seed is not None)
        with executor_from_args(args) as executor:
            result = mock_campaign(
                setup, coord, f_box_width=box, fdot_box=fdot_box, fddot_box=fddot_box,
                duty=duty, confidence=args.confidence,
                false_alarm=args.false_alarm, h0_factors=tuple(factors),
                n_injections=args.injections, n_noise=args.noise_runs,
                n_mismatch=args.mismatch_runs, bandwidth=band, interval=args.interval,
                rng=seed, executor=executor, store=store, key=key,
                progress=progress_from_args(args), chunk_size=args.chunk_size)
    finally:
        if store is not None:
            store.close()
    seed_text = str(args.seed) if args.seed is not None else f"{seed.entropy} (drawn)"
    assumptions = dict(result.assumptions)
    assumptions.update({
        "target": f"{target.name} of {args.catalogue} (RA {coord.icrs.ra.deg:.6f} deg, "
                  f"Dec {coord.icrs.dec.deg:.6f} deg)",
        "setup": f"{args.setup}: {setup.n_seg} x {setup.t_seg} segments",
        "seed": seed_text,
    })
    s = result.summary
    echo(args, f"mock-search campaign for {target.name}: {s['setup']}; "
               f"{s['n_templates']} templates, threshold 2F_sum > {s['threshold']:.4g} "
               f"(false alarm {args.false_alarm:g}); seed {seed_text}")
    iv = f"{100 * args.interval:g} % interval"
    rows = [[sci(r["h0"].value), f"{int(r['n_detected'])}/{int(r['n_injections'])}",
             f"{r['efficiency'].value:.3f}",
             f"{r['ci_low'].value:.3f}-{r['ci_high'].value:.3f}",
             f"{r['predicted'].value:.3f}", f"{r['corrected'].value:.3f}"]
            for r in result.table]
    echo(args, format_rows(["h0 [strain]", "detected", "efficiency", iv, "model",
                            "corrected"], rows))
    pct = f"{100 * args.confidence:g}"
    echo(args, f"h0 at {pct} % detection: measured {sci(s['h0_measured'])}, model "
               f"{sci(s['h0_predicted'])} (measured/model {s['ratio']:.3f}), corrected "
               f"model {sci(s['h0_corrected'])} (measured/corrected "
               f"{s['ratio_corrected']:.3f})")
    echo(args, f"loudest-template mismatch: mean {s['mismatch_mean_measured']:.3f} "
               f"measured, {s['mismatch_mean_model']:.3f} model (KS p = "
               f"{s['mismatch_ks_p']:.3g})")
    fa_lo, fa_hi = s["false_alarm_interval"]
    echo(args, f"false alarms: {s['false_alarms']}/{s['noise_runs']} noise-only searches "
               f"above the threshold ({iv} {fa_lo:.3g}-{fa_hi:.3g}; nominal "
               f"{args.false_alarm:g})")
    echo(args)
    echo(args, format_assumptions(assumptions))
    table = result.table
    table.meta.update({k: (list(v) if isinstance(v, tuple) else v) for k, v in s.items()})
    if out is not None:
        write_table(table, out, title=f"mock-search campaign for {target.name}",
                    assumptions=assumptions)
        echo(args, f"wrote {out}")
    from_plots = [(plot, "plot_mock_efficiency"), (mplot, "plot_mismatch_histogram")]
    for path, name in from_plots:
        if path is None:
            continue
        from cwlimits.plotting import validation as figs
        from cwlimits.plotting.figures import save_figure

        save_figure(getattr(figs, name)(result, title=f"{target.name}: {s['setup']}"), path,
                    formats=(path.suffix.lstrip("."),))
        echo(args, f"wrote {path}")
    return 0


def _show(box):
    return "none" if box is None else f"{box[0]:g} to {box[1]:g}"


def _option_range(values, name):
    lo, hi = values
    if not (math.isfinite(lo.value) and math.isfinite(hi.value) and lo <= hi):
        raise InputError(f"{name} needs finite LO <= HI", value=f"{lo} {hi}")
    return lo, hi


def _spin_boxes(args, setup, target):
    """(fdot_box, fddot_box) of the mock search: the options, else the plan's space.

    The plan's space is the one ``cwlimits plan`` counted templates in: the age-based space
    of the target's age and the setup's braking indices (a box about a known pulsar's
    spin-down), at the centre of the setup's band; fddot is searched where the template
    count of the setup resolves it (the count's dimension is 3).
    """
    import astropy.units as u

    from cwlimits.searchspace.cost import count_templates, resolve_space
    from cwlimits.simulation.mockcampaign import finer_rows

    f = 0.5 * (setup.f_min + setup.f_max)
    space = None
    if args.fdot_range is None or args.fddot_range is None:
        try:
            space = resolve_space(setup, target)
        except InputError:
            space = None        # no age: the campaign's own default box
    if args.fdot_range is not None:
        fdot = _option_range(args.fdot_range, "--fdot-range")
    elif space is not None:
        fdot = tuple(sorted(q.to(u.Hz / u.s) for q in space.fdot_range(f)))
        step = finer_rows(setup)["fdot_step"] * u.Hz / u.s
        if fdot[1] - fdot[0] < step:
            # thinner than one row of the bank (the plan counts one template in fdot): two
            # rows about the plan's range, so that the bank has templates
            centre = 0.5 * (fdot[0] + fdot[1])
            fdot = (centre - step, centre + step)
    else:
        fdot = None
    if args.fddot_range is not None:
        fddot = _option_range(args.fddot_range, "--fddot-range")
        return fdot, (None if fddot[0] == fddot[1] == 0 else fddot)
    if space is None or fdot is None:
        return fdot, None
    half = 0.5 * setup.band_width
    counts = count_templates(setup, space, bands=(f - half, f + half))
    dims = counts["dims_semi" if setup.n_seg > 1 else "dims_coh"]
    if int(dims.max()) < 3:
        return fdot, None
    ends = [fdot[0], fdot[1]] + ([0 * fdot[0]] if fdot[0] < 0 < fdot[1] else [])
    bounds = [space.fddot_range(f, fd) for fd in ends]
    return fdot, (min(b[0] for b in bounds).to(u.Hz / u.s**2),
                  max(b[1] for b in bounds).to(u.Hz / u.s**2))


def _check_reach(setup, box, band, fdot_box, fddot_box):
    """Refuse a box whose spin-down drift leaves the inner half of the band (as the search)."""
    import astropy.units as u
    import numpy as np

    mid = setup.segment_mid_times.to_value(u.s)
    span = float(np.ptp(mid) + setup.t_seg.to_value(u.s))
    reach = 0.0
    if fdot_box is not None:
        reach += max(abs(q.to_value(u.Hz / u.s)) for q in fdot_box) * span
    if fddot_box is not None:
        reach += max(abs(q.to_value(u.Hz / u.s**2)) for q in fddot_box) * span**2 / 8
    need = 4 * (0.5 * box.to_value(u.Hz) + reach)
    if need > band.to_value(u.Hz):
        raise InputError(
            f"--fdot-range {_show(fdot_box)} (--fddot-range {_show(fddot_box)}) drifts the "
            f"signals by {reach:.3g} Hz over the {span / 86400:.4g} day span: the searched "
            f"box ({box:g}) and its drift must lie in the inner half of the simulated band "
            f"({band:g}); give --band-width of at least {need:.3g} Hz or a narrower "
            "--fdot-range / --fddot-range", file=None, value=f"{band:g}")
