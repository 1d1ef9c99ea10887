"""Old names kept for one release: module attributes that warn when read."""

from __future__ import annotations

import warnings
from collections.abc import Callable, Mapping
from typing import Any


def module_aliases(module: str, aliases: Mapping[str, tuple[str, Any]]) -> Callable[[str], Any]:
    """A module ``__getattr__`` serving deprecated names.

    Parameters
    ----------
    module : str
        The module's ``__name__`` (for the error of an unknown name).
    aliases : mapping of str to (str, object)
        Old name to (new name, value).

    Returns
    -------
    callable
        Returns the value of an old name with a DeprecationWarning that
        names the new one; raises AttributeError for any other name.
    """

    def __getattr__(name: str) -> Any:
        if name in aliases:
            new, value = aliases[name]
            warnings.warn(f"{module}.{name} is deprecated; use {new}", DeprecationWarning, stacklevel=2)
            return value
        raise AttributeError(f"module {module!r} has no attribute {name!r}")

    return __getattr__


def rename_fields(cls: type, renames: Mapping[str, str]) -> type:
    """Keep a dataclass's old field names working: keyword and attribute, both warning.

    Parameters
    ----------
    cls : type
        A dataclass whose fields were renamed.
    renames : mapping of str to str
        Old name to new name.

    Returns
    -------
    type
        ``cls``, whose ``__init__`` takes the old keywords (DeprecationWarning;
        InputError when old and new are both given) and which has a read-only
        property for each old name (DeprecationWarning on use).
    """
    import functools

    from .errors import InputError

    init = cls.__init__

    @functools.wraps(init)
    def __init__(self: Any, *args: Any, **kwargs: Any) -> None:
        for old, new in renames.items():
            if old in kwargs:
                warnings.warn(f"{cls.__name__}({old}=...) is deprecated; use {new}", DeprecationWarning, stacklevel=2)
                if new in kwargs:
                    raise InputError(f"give {new} or its deprecated name {old}, not both")
                kwargs[new] = kwargs.pop(old)
        init(self, *args, **kwargs)

    cls.__init__ = __init__  # type: ignore[method-assign]
    for old, new in renames.items():
        setattr(cls, old, _old_attribute(cls.__name__, old, new))
    return cls


def rename_keywords(renames: Mapping[str, str]) -> Callable[[Callable[..., Any]], Callable[..., Any]]:
    """Keep a function's old keyword names working, with a DeprecationWarning.

    Parameters
    ----------
    renames : mapping of str to str
        Old keyword to new keyword.

    Returns
    -------
    callable
        A decorator; the decorated function takes each old keyword as the
        new one (DeprecationWarning naming both; InputError when both are given).
    """
    import functools

    from .errors import InputError

    def decorate(func: Callable[..., Any]) -> Callable[..., Any]:
        @functools.wraps(func)
        def wrapper(*args: Any, **kwargs: Any) -> Any:
            for old, new in renames.items():
                if old in kwargs:
                    warnings.warn(f"{func.__name__}({old}=...) is deprecated; use {new}", DeprecationWarning,
                                  stacklevel=2)
                    if new in kwargs:
                        raise InputError(f"give {new} or its deprecated name {old}, not both")
                    kwargs[new] = kwargs.pop(old)
            return func(*args, **kwargs)

        return wrapper

    return decorate


def _old_attribute(owner: str, old: str, new: str) -> property:
    def read(self: Any) -> Any:
        warnings.warn(f"{owner}.{old} is deprecated; use {new}", DeprecationWarning, stacklevel=2)
        return getattr(self, new)

    read.__doc__ = f"Deprecated name of ``{new}`` (warns)."
    return property(read)


def renamed_value(what: str, value: str, renames: Mapping[str, str]) -> str:
    """The new spelling of an option value renamed for one release, with a DeprecationWarning.

    Parameters
    ----------
    what : str
        What the value sets, for the message (e.g. ``"the stability setting"``).
    value : str
        The value as given.
    renames : mapping of str to str
        Old spelling to new spelling.

    Returns
    -------
    str
        ``renames[value]`` (warning) or ``value`` itself when it is not an old spelling.
    """
    if value not in renames:
        return value
    warnings.warn(f"{what} {value!r} is deprecated; use {renames[value]!r}", DeprecationWarning, stacklevel=3)
    return renames[value]
