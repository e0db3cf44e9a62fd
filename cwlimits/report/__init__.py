"""The report: an analysis configuration run as a chain into one HTML folder.

:mod:`.config` reads and checks the configuration (TOML), :mod:`.chain` runs the steps
(catalogue, indirect limits, ranking, plans, sensitivity, limits) and :mod:`.html` writes the
staged report folder, which replaces only a folder that cwlimits wrote itself.
"""

from .chain import (
    CAUTION,
    STEPS,
    run_report,
    simulate_results,
)
from .config import (
    CONFIG_KEYS,
    AnalysisConfig,
    load_config,
)
from .html import (
    MANIFEST_NAME,
    Report,
    check_report_folder,
    file_sha256,
    package_versions,
)

__all__ = [
    "run_report",
    "simulate_results",
    "CAUTION",
    "STEPS",
    "CONFIG_KEYS",
    "AnalysisConfig",
    "load_config",
    "Report",
    "file_sha256",
    "package_versions",
    "check_report_folder",
    "MANIFEST_NAME",
]
