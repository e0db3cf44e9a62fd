"""Resolve what the user names (``--noise MODEL_OR_FILE``) into a noise source."""

from __future__ import annotations

from pathlib import Path

from cwlimits.errors import InputError
from cwlimits.noise._base import NoiseSource
from cwlimits.noise.files import read_noise_file
from cwlimits.noise.models import _RETIRED_NOISE_MODELS, NOISE_MODELS, noise_model

__all__ = ["get_noise"]


def get_noise(spec: str | Path | NoiseSource, kind: str | None = None) -> NoiseSource:
    """Return the noise source a model name or a file path names.

    Parameters
    ----------
    spec : str, Path or NoiseSource
        A key of :data:`~cwlimits.noise.NOISE_MODELS` (case-insensitive), the path of an
        existing noise file (see :func:`~cwlimits.noise.read_noise_file`), or a noise
        source, returned as it is.
    kind : {'asd', 'psd'}, optional
        For a file: what its second column is, if the header does not say.

    Returns
    -------
    NoiseSource

    Raises
    ------
    InputError
        Neither a known model nor an existing file; the message lists the known models.
    TableError
        A file that cannot be read as a noise curve.
    """
    if isinstance(spec, NoiseSource):
        return spec
    text = str(spec).strip()
    # a model name wins over a file of the same name in the working folder
    if text.lower() in NOISE_MODELS or text.lower() in _RETIRED_NOISE_MODELS:
        return noise_model(text)
    if Path(text).is_file():
        return read_noise_file(text, kind)
    raise InputError("not a known noise model nor an existing file; known models: "
                     f"{', '.join(NOISE_MODELS)}", value=text)
