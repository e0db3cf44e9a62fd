"""Names and defaults the command line needs before any work (private, not for outside use).

``cwlimits --help`` and every ``cwlimits COMMAND --help`` build their parsers from these
plain strings, numbers and tuples, so that they start without importing numpy, astropy or
scipy (issue 16: start-up in well under a second).  The library modules that own each
concept import their value from here and attach units there: one definition each.
"""

__all__ = ["DEFAULTS", "COMMAND_DEFAULTS", "default_for", "DEFAULT_NOISE_MODEL", "NOISE_KINDS",
           "OBJECTIVES", "MEASURES", "CASES", "PLOT_SUFFIXES",
           "DEFAULT_CHUNK_SIZE", "DEFAULT_START", "DEFAULT_CAMPAIGN_CHUNK", "STORE_NAME",
           "DEFAULT_UNIT_COSTS_S", "DEFAULT_MOMENT_OF_INERTIA_KG_M2", "MOMENT_OF_INERTIA_TEXT",
           "REPORT_STEPS", "PULSAR_KINDS", "EMISSION_NAMES", "PULSAR_N_SIGMA",
           "PULSAR_NOISE_DRAWS", "PULSAR_MAX_STRETCH", "PULSAR_NOISE_MODES",
           "PULSAR_SAMPLERS", "PULSAR_HARMONICS", "TABLE_SUFFIXES", "DEFAULT_SEED",
           "LATEX_TABULAR_SUFFIX",
           "builtin_detector_names"]

#: The noise model used when none is given (cwlimits.noise.models).
DEFAULT_NOISE_MODEL = "second-gen-fit"
#: What the values of a noise file are: amplitude or power spectral density.
NOISE_KINDS = ("asd", "psd")
#: Planning objectives, beat-age measures and distance/age cases (cwlimits.planning).
OBJECTIVES = ("depth", "beat-age")
MEASURES = ("width", "integral")
CASES = ("nominal", "optimistic", "pessimistic")
#: The seed of every random draw of a command run without ``--seed`` (limits, targeted,
#: posterior, validate): a run repeats its numbers; the seed is recorded in the output.
DEFAULT_SEED = 0
#: File suffixes a table can be written to (cwlimits.tables.write_table): CSV with units in
#: the header, ECSV, and LaTeX (an AASTeX ``deluxetable``; a name ending in
#: ``LATEX_TABULAR_SUFFIX`` gives a plain ``table``/``tabular`` instead).
TABLE_SUFFIXES = (".csv", ".ecsv", ".tex")
LATEX_TABULAR_SUFFIX = ".tabular.tex"
#: File suffixes a figure can be written to (cwlimits.plotting.figures).
PLOT_SUFFIXES = (".png", ".svg", ".pdf")
#: Items per chunk of a long run (cwlimits.runtime.executor).
DEFAULT_CHUNK_SIZE = 4096
#: Default start of the data, UTC (cwlimits.sensitivity).
DEFAULT_START = "2030-01-01T00:00:00"
#: Injections per chunk of a validation campaign (cwlimits.simulation.campaigns).
DEFAULT_CAMPAIGN_CHUNK = 200
#: File name of the results store in an output folder (cwlimits.runtime.store).
STORE_NAME = "cwlimits-store.sqlite"
#: Unit costs in seconds per template (cwlimits.searchspace.searchsetup).
DEFAULT_UNIT_COSTS_S = {"coherent": 7e-8, "semicoherent": 6e-9}
#: Fiducial moment of inertia, kg m^2 (common practice; cwlimits.targets.fiducial).
DEFAULT_MOMENT_OF_INERTIA_KG_M2 = 1e38
#: Steps of ``cwlimits report`` (cwlimits.report.chain).
REPORT_STEPS = 5
#: Known pulsars (cwlimits.pulsars): search kinds, emission model names, half-width of the
#: timing box in sigma (common practice: 3 sigma), noise-only data sets of the expected
#: limit, most samples of a stretch, noise treatments, samplers, harmonics ('22': data at
#: 2 f_rot, amplitude h0 = 2 C22; '21': data at f_rot, amplitude C21).
PULSAR_KINDS = ("auto", "targeted", "narrow-band")
EMISSION_NAMES = ("dual", "rmode", "single")
PULSAR_N_SIGMA = 3.0
PULSAR_NOISE_DRAWS = 400
PULSAR_MAX_STRETCH = 30
PULSAR_NOISE_MODES = ("student-t", "given", "estimated")
PULSAR_SAMPLERS = ("grid", "emcee")
PULSAR_HARMONICS = ("22", "21")
#: The same, as the command line's default text (parsed by the option's type).
MOMENT_OF_INERTIA_TEXT = f"{DEFAULT_MOMENT_OF_INERTIA_KG_M2:g} kg m2"


#: The one table of defaults every command reads (documented in docs/defaults.md):
#: setting -> (value, meaning).  Quantities are strings, parsed where they are used.
DEFAULTS = {
    "noise": (DEFAULT_NOISE_MODEL, "noise model of every detector"),
    "confidence": (0.95, "credible level of a limit; detection probability of a "
                         "sensitivity"),
    "false_alarm": (0.01, "false-alarm probability per band"),
    "band_width": ("1 Hz", "width of the reporting bands"),
    "objective": ("depth", "what a plan maximises: the sensitivity depth, or the band "
                           "below the age-based limit (beat-age)"),
    "case": ("pessimistic", "distance and age of the indirect limit a plan or ranking "
                            "is measured against"),
    "measure": ("integral", "beat-age figure of merit: the integral of ln(h_age/h0) over "
                            "the frequencies where h0 < h_age (Hz), or the width of that "
                            "band (Hz)"),
    "method": ("bayes", "upper-limit method"),
    "prior": ("uniform", "prior on h0 of a Bayesian limit"),
    "seed": (DEFAULT_SEED, "seed of every random draw"),
}

#: Where a command differs from :data:`DEFAULTS`: (command, setting) -> (value, reason).
COMMAND_DEFAULTS = {
    ("plan", "case"): (
        "nominal", "one target's plan is sized on its best estimate of distance and age; "
                   "--case pessimistic gives the cautious plan the ranking uses"),
    ("plan", "measure"): (
        "width", "one plan is judged by the width in Hz of the band where it beats the "
                 "age-based limit, the number a proposal quotes; ranking several targets "
                 "needs the integral, which also counts by how much"),
    ("report", "objective"): (
        "beat-age", "a report plans the targets the ranking chose for their indirect "
                    "limits: what counts there is beating them"),
    ("report", "band_width"): (
        "5 Hz", "a report's tables and figures over hundreds of Hz stay readable (a row "
                "per 5 Hz); a search's own bands are set by its setup file"),
    ("validate", "confidence"): (
        0.9, "an injection campaign reports the h0 detected in 90 % of injections, the "
               "level such campaigns are usually quoted at (common practice); --confidence "
               "0.95 matches the sensitivity curves"),
}


def default_for(command, setting):
    """Return the default of ``setting`` for ``command``.

    Its row of :data:`COMMAND_DEFAULTS` if the command differs, else the shared value of
    :data:`DEFAULTS`.
    """
    if (command, setting) in COMMAND_DEFAULTS:
        return COMMAND_DEFAULTS[(command, setting)][0]
    return DEFAULTS[setting][0]


def builtin_detector_names():
    """Site codes of the built-in detectors, in file order, read without astropy.

    The first column of ``cwlimits/data/detectors.csv`` (the table that
    :func:`cwlimits.response.antenna.builtin_detectors` reads in full), for the help text.
    """
    import csv
    from importlib import resources

    text = (resources.files("cwlimits") / "data" / "detectors.csv").read_text("utf-8")
    rows = csv.reader(line for line in text.splitlines()
                      if line.strip() and not line.lstrip().startswith("#"))
    next(rows)  # the header
    return tuple(row[0].strip() for row in rows if row)
