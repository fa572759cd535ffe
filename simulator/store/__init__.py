"""Result files of batch studies: HDF5, readable with plain h5py.

One module per job:

:mod:`~partload.store.format`
    The documented HDF5 layout (``FORMAT``, ``FORMAT_VERSION``, the versions
    read) and the checks that a file is a partload result, not in use and not
    damaged.
:mod:`~partload.store.writer`
    :func:`check_target` and :class:`StudyFile`: create a file whole, resume
    it, store finished chunks so that a kill never leaves a broken file.
:mod:`~partload.store.reader`
    :func:`open_result`, :func:`read_study` and :class:`StudyData`.
:mod:`~partload.store.export`
    :func:`to_display` (the engineer's units), :func:`export_csv` and
    :func:`write_whole` (a file written whole or not at all).

Importing the store loads h5py and numpy, not the solver: the plan and
layout a study hands to :class:`StudyFile` are only used, never imported.
The reader and the export are imported when first asked for: a study
process writes and never reads.
"""

from .format import FORMAT, FORMAT_VERSION
from .writer import StudyFile, check_target


def __getattr__(name: str):
    """The reader's and the export's names, imported when first used."""
    if name in ("StudyData", "open_result", "read_study"):
        from . import reader

        return getattr(reader, name)
    if name in ("export_csv", "to_display", "write_whole"):
        from . import export

        return getattr(export, name)
    raise AttributeError(f"module {__name__!r} has no attribute {name!r}")

__all__ = [
    "FORMAT",
    "FORMAT_VERSION",
    "StudyFile",
    "StudyData",
    "check_target",
    "open_result",
    "read_study",
    "export_csv",
    "to_display",
    "write_whole",
]
