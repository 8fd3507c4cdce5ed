"""Small wording helpers shared by messages: plural forms, changes and factors said plainly.

A message reads "1 zone", "3 zones", "1 pass"; a factor below one is a fall,
not a jump; a figure that did not change is said not to have changed, and a
small figure keeps enough digits to be told from zero. This is a shared
low-level module (standard library only), so every stage may use it.
"""

from __future__ import annotations

__all__ = ["FIGURE_DIGITS", "change_phrase", "count", "factor_phrase", "figure", "plural"]

#: Significant digits of a figure in a message: enough to tell 0.0001234 from
#: 0.0001239 and from 0 (the "g" format keeps the exponent of small numbers).
FIGURE_DIGITS = 4

#: Endings that take "es" in the plural (pass -> passes, box -> boxes).
_ES_ENDINGS = ("s", "x", "z", "ch", "sh")


def plural(number: float, word: str, words: str | None = None) -> str:
    """``word`` for exactly one, else its plural (``words``, or ``word`` + s/es).

    Examples
    --------
    >>> plural(1, "zone"), plural(3, "zone"), plural(2, "pass"), plural(0, "zone")
    ('zone', 'zones', 'passes', 'zones')
    """
    if number == 1:
        return word
    if words is not None:
        return words
    return word + ("es" if word.endswith(_ES_ENDINGS) else "s")


def count(number: int, word: str, words: str | None = None) -> str:
    """``number`` and the right form of ``word``, with thousands separators.

    Examples
    --------
    >>> count(1, "zone"), count(1200, "link"), count(1, "articulation node")
    ('1 zone', '1,200 links', '1 articulation node')
    """
    return f"{number:,} {plural(number, word, words)}"


def figure(value: float) -> str:
    """A figure for a message, to :data:`FIGURE_DIGITS` significant digits.

    Examples
    --------
    >>> figure(0.015208373), figure(0.0), figure(1.2345e-7)
    ('0.01521', '0', '1.235e-07')
    """
    return f"{value:.{FIGURE_DIGITS}g}"


def factor_phrase(factor: float) -> str:
    """``jumps 2.4 times`` for a rise, ``falls to 0.94 times`` for a fall.

    Examples
    --------
    >>> factor_phrase(2.4), factor_phrase(0.94), factor_phrase(1.0)
    ('jumps 2.4 times', 'falls to 0.94 times', 'stays the same')
    """
    if factor > 1:
        return f"jumps {factor:.2g} times"
    if factor < 1:
        return f"falls to {factor:.2g} times"
    return "stays the same"


def change_phrase(what: str, before: float, after: float, moves: int, unit: str = "move") -> str:
    """What a step did to a figure, said plainly when nothing changed.

    Examples
    --------
    >>> change_phrase("the normalized cut", 0.0, 0.0, 0)
    'no move was needed (the normalized cut stays 0)'
    >>> change_phrase("the normalized cut", 0.0213, 0.0201, 3)
    'lowered the normalized cut from 0.0213 to 0.0201 (3 moves)'
    """
    if moves == 0:
        return f"no {unit} was needed ({what} stays {figure(after)})"
    if before == after:
        return f"{count(moves, unit)} left {what} at {figure(after)}"
    verb = "lowered" if after < before else "raised"
    return f"{verb} {what} from {figure(before)} to {figure(after)} ({count(moves, unit)})"
