"""Renamed names that keep working for one release (shared; not for outside use).

The glossary (DEVELOPERS.md, "Conventions"; docs/glossary.md) gives one name to each
thing.  A keyword argument or an input-table column of an earlier version still works
for one release: it is mapped to its new name with a
:class:`~cwlimits.errors.CwlimitsDeprecationWarning` that names both.
"""

import functools
import warnings

from cwlimits.errors import CwlimitsDeprecationWarning, InputError

__all__ = ["renamed_keywords", "warn_renamed"]


def warn_renamed(kind, old, new, where="", stacklevel=3):
    """Warn that the ``kind`` (keyword, column, option) ``old`` is now called ``new``."""
    place = f" of {where}" if where else ""
    warnings.warn(f"the {kind} '{old}'{place} is now called '{new}'; the old name works "
                  "for this release only", CwlimitsDeprecationWarning, stacklevel=stacklevel)


def renamed_keywords(**renames):
    """Decorator: accept the old keyword names ``old=new`` with a deprecation warning.

    Giving both the old and the new name of one argument is an error.
    """
    def decorate(func):
        @functools.wraps(func)
        def wrapper(*args, **kwargs):
            for old, new in renames.items():
                if old in kwargs:
                    if new in kwargs:
                        raise InputError(f"{func.__name__}: give '{new}' (the old name "
                                         f"'{old}' is the same argument), not both")
                    warn_renamed("keyword", old, new, f"{func.__name__}()")
                    kwargs[new] = kwargs.pop(old)
            return func(*args, **kwargs)
        wrapper.renamed_keywords = dict(renames)
        return wrapper
    return decorate
