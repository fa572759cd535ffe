"""Small readers shared by the component kinds' model-file tables."""

from __future__ import annotations

from ..units import Where

__all__ = ["edge_names", "ratio_list"]


def edge_names(reader, table: str) -> tuple[str | None, str | None, str | None]:
    """The ``name``, ``from`` and ``to`` of a steam-path component's table.

    Once its name is known, the reader's messages name the component
    (``[stage_group 'HP1']``) instead of its position in the file.
    """
    name = reader.string("name")
    if name:
        reader.where = Where(reader.where.file, f"{table} '{name}'", None)
    return name, reader.string("from"), reader.string("to")


def ratio_list(reader, key: str) -> list[float] | None:
    """A list of two or more positive plain numbers (ratios) [-]."""
    values = reader.raw(key)
    if values is None:
        return None
    w = reader.where.child(key)
    if (not isinstance(values, list) or len(values) < 2
            or not all(isinstance(v, (int, float)) and not isinstance(v, bool) for v in values)):
        reader.problems.add(w.error(f"expected a list of two or more numbers, got {values!r}"))
        return None
    bad = [v for v in values if not (v > 0.0 and v < float("inf"))]
    if bad:
        reader.problems.add(w.error(f"ratios must be positive and finite, got {bad[0]!r}"))
        return None
    return [float(v) for v in values]
