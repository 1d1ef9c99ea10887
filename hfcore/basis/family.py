"""The contract every basis family meets.

A family turns an element into a list of :class:`ElementShell` templates.
Fitted STO-nG sets, the published sets shipped with hfcore, user basis files
and sets looked up in an installed basis-set library are all families, so
they are built and used the same way.
"""

from __future__ import annotations

from abc import ABC, abstractmethod

from .. import elements
from ..errors import BasisError
from .shells import ElementShell


class BasisFamily(ABC):
    """A source of shells per element.

    Subclasses implement :meth:`element_shells` and :meth:`elements`, and set
    the attributes below.

    Attributes
    ----------
    name : str
        Canonical name, e.g. ``"STO-3G"`` or ``"cc-pVDZ"``.
    default_spherical : bool
        Whether the trade normally uses real spherical (True) or Cartesian
        (False) d and higher functions with this family.
    citation : str
        The published reference for the set (empty if none).
    """

    name: str = ""
    default_spherical: bool = True
    citation: str = ""

    @abstractmethod
    def elements(self) -> frozenset[int]:
        """Atomic numbers this family defines."""

    @abstractmethod
    def element_shells(self, z: int) -> list[ElementShell]:
        """The shells of element ``z``, in the family's order.

        Parameters
        ----------
        z : int
            Atomic number.

        Returns
        -------
        list of ElementShell
            Unplaced shell templates (exponents in bohr⁻², coefficients of
            normalised primitives), in the order the basis functions take.

        Raises
        ------
        BasisError
            If the family does not define element ``z``.
        """

    def covers(self, z: int) -> bool:
        """True if the family defines element ``z``."""
        return z in self.elements()

    def __repr__(self) -> str:
        return f"<{type(self).__name__} {self.name}>"


class CachedFamily(BasisFamily):
    """A family that reads each element's shells once, on first use.

    Subclasses implement :meth:`elements` and :meth:`_read_element_shells`,
    and may set :attr:`origin` to prefix the missing-element message (e.g.
    with a file name).
    """

    origin: str = ""

    def __init__(self) -> None:
        self._cache: dict[int, list[ElementShell]] = {}

    @abstractmethod
    def _read_element_shells(self, z: int) -> list[ElementShell]:
        """Read (and validate) the shells of element ``z``, which the family defines."""

    def element_shells(self, z: int) -> list[ElementShell]:
        if z not in self.elements():
            raise BasisError(f"{self.origin}basis {self.name} does not define element {elements.symbol(z)}")
        if z not in self._cache:
            self._cache[z] = self._read_element_shells(z)
        # A copy, so a caller that edits its list leaves the cache intact.
        return list(self._cache[z])
