"""Warn and fail levels of a measure, and the rules a pair of levels must keep.

A level (:class:`~accuracy_checks.config.models.Level`) is a declaration; whether it suits its
measure depends on the measure's direction (which way is better), which the caller passes in
(:func:`check_level`): the config layer does not know the measures itself (see
:mod:`accuracy_checks.config.catalogue`).
"""

from __future__ import annotations

from typing import Literal

__all__ = ["Bound", "Direction", "check_level"]

#: ``lower``: lower is better; ``centered``: closer to 0 is better; ``higher``: higher is better.
Direction = Literal["lower", "centered", "higher"]

#: One level: a number, or a ``(low, high)`` pair for a centred measure.
Bound = float | tuple[float, float]


def _as_pair(bound: Bound, direction: Direction) -> tuple[float, float]:
    if isinstance(bound, tuple):
        return bound
    return (-bound, bound) if direction == "centered" else (bound, bound)


def _show(bound: Bound) -> str:
    if isinstance(bound, tuple):
        return f"[{bound[0]:g}, {bound[1]:g}]"
    return f"{bound:g}"


def check_level(where: str, warn: Bound | None, fail: Bound | None,
                direction: Direction) -> None:
    """Raise ``ValueError`` (naming ``where``) unless the ``warn`` and ``fail`` levels suit a
    measure judged in ``direction``: pairs only for centred measures, low ≤ high, a centred
    number ≥ 0, and warn before fail (inside it for centred measures).

    >>> check_level("thresholds.default.wape", 25.0, 40.0, "lower")
    >>> check_level("thresholds.default.wape", 40.0, 25.0, "lower")  # doctest: +ELLIPSIS
    Traceback (most recent call last):
    ...
    ValueError: thresholds.default.wape: warn 40 is beyond fail 25; for this measure lower is ...
    """
    for name, bound in (("warn", warn), ("fail", fail)):
        if isinstance(bound, tuple):
            if direction != "centered":
                raise ValueError(
                    f"{where}.{name}: a [low, high] pair only suits measures judged by their "
                    f"distance from 0 (me, bias_pct, series_count_change_pct); give one number"
                )
            if bound[0] > bound[1]:
                raise ValueError(f"{where}.{name}: low {bound[0]} is above high {bound[1]}")
        elif bound is not None and direction == "centered" and bound < 0:
            raise ValueError(
                f"{where}.{name}: {bound} bounds the absolute value and cannot be negative; "
                "use a [low, high] pair for asymmetric bounds"
            )
    if warn is None or fail is None:
        return
    w, f = warn, fail
    if direction == "centered":
        (wl, wh), (fl, fh) = _as_pair(w, direction), _as_pair(f, direction)
        if not (fl <= wl and wh <= fh):
            raise ValueError(
                f"{where}: the warn level {_show(w)} must lie inside the fail level {_show(f)} "
                "(warn comes before fail)"
            )
    elif direction == "lower" and w > f:  # type: ignore[operator]
        raise ValueError(
            f"{where}: warn {_show(w)} is beyond fail {_show(f)}; for this measure lower is "
            f"better, so warn must be ≤ fail (e.g. warn: {_show(f)}, fail: {_show(w)})"
        )
    elif direction == "higher" and w < f:  # type: ignore[operator]
        raise ValueError(
            f"{where}: warn {_show(w)} is below fail {_show(f)}; for this measure higher is "
            "better, so warn must be ≥ fail"
        )
