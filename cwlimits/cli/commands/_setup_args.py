"""Setup options shared by the commands that read a search setup.

``--setup FILE`` and the options that override its values, for ``cost``, ``sensitivity``,
``limits`` and ``plan``.
"""


from cwlimits._defaults import DEFAULT_START, DEFAULT_UNIT_COSTS_S
from cwlimits.cli.commands._common import quantity_arg
from cwlimits.errors import ConfigError, InputError

__all__ = ["add_setup_args", "add_signal_model_args", "build_setup"]

# option dest -> SearchSetup field (or a part of one)
_OVERRIDES = ("t_seg", "n_seg", "span", "duty_factor", "mismatch_coherent",
              "mismatch_semicoherent", "lattice", "band_width", "cost_coherent",
              "cost_semicoherent")


def add_setup_args(parser):
    """Add ``--setup FILE`` and the setup options (which override the file's values)."""
    parser.add_argument("--setup", metavar="FILE", help="TOML setup file")
    grp = parser.add_argument_group("setup (override the file)")
    grp.add_argument("--t-seg", type=quantity_arg("d", "segment length"), metavar="T",
                     help="coherent segment length (e.g. 10day)")
    grp.add_argument("--n-seg", type=int, metavar="N", help="number of segments")
    grp.add_argument("--span", type=quantity_arg("d", "span"), metavar="T",
                     help="total observation span (segments spread evenly over it)")
    grp.add_argument("--duty-factor", type=float, metavar="X",
                     help="fraction of time with data (for the sensitivity; not the cost)")
    grp.add_argument("--detectors", metavar="LIST",
                     help="comma-separated site codes (default H1,L1)")
    grp.add_argument("--mismatch-coherent", type=float, metavar="MU",
                     help="maximum mismatch of the coherent grid (default 0.3)")
    grp.add_argument("--mismatch-semicoherent", type=float, metavar="MU",
                     help="maximum mismatch of the semi-coherent grid (default 0.3)")
    grp.add_argument("--lattice", choices=sorted({"covering", "cubic"}),
                     help="template lattice: covering (A_n*, default) or cubic (Z^n)")
    grp.add_argument("--f-min", type=quantity_arg("Hz", "f_min"), metavar="F",
                     help="lower band edge")
    grp.add_argument("--f-max", type=quantity_arg("Hz", "f_max"), metavar="F",
                     help="upper band edge")
    grp.add_argument("--band-width", type=quantity_arg("Hz", "band width"), metavar="DF",
                     help="width of the reporting bands (default 1Hz)")
    grp.add_argument("--braking-index-min", type=float, metavar="N",
                     help="smallest braking index (default 2)")
    grp.add_argument("--braking-index-max", type=float, metavar="N",
                     help="largest braking index (default 7)")
    grp.add_argument("--cost-coherent", type=quantity_arg("s", "unit cost"), metavar="T",
                     help="seconds per coherent template per detector per segment "
                          f"(default {DEFAULT_UNIT_COSTS_S['coherent']} s)")
    grp.add_argument("--cost-semicoherent", type=quantity_arg("s", "unit cost"),
                     metavar="T", help="seconds per semi-coherent template per segment "
                                       f"(default {DEFAULT_UNIT_COSTS_S['semicoherent']} s)")


def add_signal_model_args(parser):
    """Add ``--sky``, ``--mismatch`` and ``--start``: the options of the signal model."""
    model = parser.add_argument_group("signal model")
    model.add_argument("--sky", choices=("target", "isotropic"), default="target",
                       help="orientation factor at the target (default) or all-sky")
    model.add_argument("--mismatch", choices=("distribution", "quadratic", "mean", "none"),
                       default="distribution",
                       help="mismatch model (default distribution: the lattice draws with "
                            "the mock-search correction; quadratic: uncorrected)")
    model.add_argument("--start", default=DEFAULT_START,
                       help=f"start of the data, UTC (default {DEFAULT_START})")
    return model


def build_setup(args, default_band=None, extra_sections=(), *, known_sites=False):
    """The :class:`SearchSetup` of ``--setup FILE`` with the options applied.

    With ``known_sites`` (commands that need the antenna patterns) every detector must be
    a built-in site; the error names ``--detectors`` or the setup file and its key.
    """
    setup = _build_setup(args, default_band, extra_sections)
    if known_sites:
        from cwlimits.response.antenna import get_detectors

        try:
            get_detectors(list(setup.detectors))
        except InputError as exc:
            if args.detectors is not None:
                raise InputError(f"--detectors: {exc.reason}", value=args.detectors) from None
            raise ConfigError(f"key 'data.detectors': {exc.reason}", file=args.setup,
                              value=list(setup.detectors)) from None
    return setup


def _build_setup(args, default_band, extra_sections):
    from cwlimits.searchspace.searchsetup import SearchSetup, load_setup

    base = (load_setup(args.setup, extra_sections=extra_sections) if args.setup
            else None)
    given = {name: getattr(args, name) for name in _OVERRIDES
             if getattr(args, name) is not None}
    if args.detectors is not None:
        given["detectors"] = tuple(d.strip() for d in args.detectors.split(",") if d.strip())
    try:
        if base is None:
            missing = [opt for opt, name in (("--t-seg", "t_seg"), ("--n-seg", "n_seg"))
                       if name not in given]
            band = (args.f_min if args.f_min is not None else (default_band or (None,))[0],
                    args.f_max if args.f_max is not None else (default_band or (0, None))[1])
            missing += [opt for opt, f in zip(("--f-min", "--f-max"), band, strict=True)
                        if f is None]
            if missing:
                raise InputError(f"without --setup FILE give {', '.join(missing)}")
            n_min = 2.0 if args.braking_index_min is None else args.braking_index_min
            n_max = 7.0 if args.braking_index_max is None else args.braking_index_max
            return SearchSetup(band=band, braking_index=(n_min, n_max), **given)
        band = (args.f_min if args.f_min is not None else base.f_min,
                args.f_max if args.f_max is not None else base.f_max)
        n_min, n_max = base.braking_index
        n_min = n_min if args.braking_index_min is None else args.braking_index_min
        n_max = n_max if args.braking_index_max is None else args.braking_index_max
        if base.mid_times is not None and ("t_seg" in given or "n_seg" in given):
            # explicit mid-times belong to the file's segments; new segments drop them
            given["mid_times"] = None
        return base.replace(band=band, braking_index=(n_min, n_max), **given)
    except InputError as exc:
        field = getattr(exc, "field", None)
        if field is None:
            raise
        option = {"n_min": "braking-index-min", "n_max": "braking-index-max",
                  "band": "f-min/--f-max"}.get(field, field.replace("_", "-"))
        raise InputError(f"--{option}: {getattr(exc, 'short', exc.reason)}",
                         value=exc.value) from None
