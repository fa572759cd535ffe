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
"""

from .export import export_csv, to_display, write_whole
from .format import FORMAT, FORMAT_VERSION
from .reader import StudyData, open_result, read_study
from .writer import StudyFile, check_target

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
