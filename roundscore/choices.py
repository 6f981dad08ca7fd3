"""Method choices: a ``Literal[...]`` type lists the allowed values, and one helper here checks them.

Every choice of a method or setting (an assigned-value method, the item
checks' consequence, the outlier action, the signal words, a decimal mark, a
statistic's option...) is a ``typing.Literal`` alias defined once beside the
code that uses it. Its allowed values are read from that alias, never written
again: :func:`options` gives them, :func:`options_text` shows them in a
message, :func:`check_choice` refuses anything else with one message form,
``NAME: found VALUE; allowed: 'a', 'b'``.

>>> from typing import Literal
>>> Side = Literal["two-sided", "greater", "less"]
>>> options(Side)
('two-sided', 'greater', 'less')
>>> options_text(Side, last=" or ")
"'two-sided', 'greater' or 'less'"
>>> check_choice("sided", "greater", Side)
'greater'
"""

from __future__ import annotations

from typing import Any, get_args

from roundscore.errors import InputError, RoundscoreError, shown_value

__all__ = ["options", "options_text", "is_choice", "check_choice"]


def options(choice: Any) -> tuple[str, ...]:
    """The allowed values of a ``Literal[...]`` alias, in the order written."""
    values = get_args(choice)
    if not values:
        raise TypeError(f"expected a Literal[...] type, got {choice!r}")
    return tuple(values)


def options_text(choice: Any, *, last: str = ", ") -> str:
    """The allowed values quoted for a message: ``'a', 'b', 'c'`` (``last`` joins the last two)."""
    shown = [repr(v) for v in options(choice)]
    return shown[0] if len(shown) == 1 else ", ".join(shown[:-1]) + last + shown[-1]


def is_choice(value: object, choice: Any) -> bool:
    """Whether ``value`` is one of the allowed values (of the same type: ``True`` is not ``1``)."""
    return any(type(value) is type(o) and value == o for o in options(choice))


def check_choice(name: str, value: object, choice: Any, *,
                 error: type[RoundscoreError] = InputError) -> str:
    """``value`` when it is one of the values of ``choice``, else ``error`` naming ``name`` and the allowed values.

    Parameters
    ----------
    name : str
        The parameter or key, for the message.
    value : object
        What was given.
    choice : typing.Literal alias
        The alias listing the allowed strings.
    error : RoundscoreError subclass
        :class:`~roundscore.errors.InputError` (default) for a value read from
        a file or given by a user, :class:`~roundscore.errors.StatisticsError`
        for a statistic's option.

    Returns
    -------
    str
        ``value`` unchanged.
    """
    if not is_choice(value, choice):
        message = f"{name}: found {shown_value(value)}; allowed: {options_text(choice)}"
        raise error.single(message) if issubclass(error, InputError) else error(message)
    return str(value)
