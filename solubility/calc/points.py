"""The results of the solvus engine at each temperature and along a line (plain data, no computation).

`BoundaryPoint` is one end of the host's single-phase field at one temperature (the solvus, or the lower end of
`solubility.calc.lower`); `PartnerChange` and `FieldEnd` are events along a line, located in temperature;
`SolvusLine` holds them all with what is needed to turn site fractions into compositions.
"""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass, field

import numpy as np

from solubility.calc.host import HostModel

__all__ = ["BoundaryPoint", "FieldEnd", "PartnerChange", "SolvusLine"]


@dataclass(frozen=True)
class BoundaryPoint:
    """The solvus at one temperature.

    Attributes
    ----------
    T
        Temperature, K.
    s
        ln of the solute's site fraction in the host at the boundary (nan when there is none).
    partners
        Phases at zero amount on the boundary (one, or two at an invariant).
    mu
        Chemical potentials of the elements at the boundary, J/mol (elements order of the system).
    status
        "ok" (a boundary, solved and checked), "host_unstable" (the host is not stable at any solute content),
        "below_limit" (the solubility is below the searched site fraction Y_MIN), "no_partner" (no phase limits
        the solubility) or "failed" (the solve or its check failed).
    reason
        Why there is no number (or why it is not converged); "" otherwise.
    phase_y
        Constitution of each refined phase at its optimum at the boundary (warm starts for the next point).
    max_other_df
        Largest driving force of any non-partner candidate at the boundary, J/mol of atoms (must be <= 0).
    """

    T: float
    s: float
    partners: tuple[str, ...]
    mu: np.ndarray
    status: str
    reason: str = ""
    phase_y: Mapping[str, np.ndarray] = field(default_factory=dict)
    max_other_df: float = float("nan")
    partner_x: np.ndarray | None = None  # mole fractions of the (first) partner, elements order

    @property
    def valid(self) -> bool:
        """A boundary was found and checked."""
        return self.status == "ok"

    @property
    def converged(self) -> bool:
        """The calculation reached a definite answer (a boundary, or a definite absence of one)."""
        return self.status != "failed"


@dataclass(frozen=True)
class PartnerChange:
    """A temperature where the partner phase changes along the line."""

    T: float  # K, to T_TOL
    below: tuple[str, ...]
    above: tuple[str, ...]
    s: float = float("nan")  # ln(y_solute) of the host at T (the host's corner of the three-phase triangle)


@dataclass(frozen=True)
class SolvusLine:
    """Raw result of `solvus_line`: one point per requested temperature (in the order given)."""

    points: tuple[BoundaryPoint, ...]
    changes: tuple[PartnerChange, ...]
    host: HostModel
    elements: tuple[str, ...]
    molar_masses: np.ndarray
    candidates: tuple[str, ...]
    host_moles: np.ndarray  # (n_el, ny): moles of each element per formula unit of the host = host_moles @ y
    lower: tuple[BoundaryPoint, ...] = ()  # the lower end of the field at each temperature (empty: not solved)
    field_ends: tuple = ()  # `solubility.calc.lower.FieldEnd`: where the host's field opens or closes
    lower_changes: tuple[PartnerChange, ...] = ()  # where the lower end's partner changes (located to T_TOL)


@dataclass(frozen=True)
class FieldEnd:
    """A temperature where the host's single-phase field opens or closes along the line.

    Attributes
    ----------
    T
        K, to T_TOL (nan when it could not be located).
    kind
        "opens": with rising temperature the host's field appears at T; "closes": it disappears at T.
    partners
        The phases the host meets there (the lower partner and the upper partner where the two ends meet).
    s
        ln of the solute's site fraction of the host at T (nan when unknown).
    """

    T: float
    kind: str
    partners: tuple[str, ...]
    s: float = float("nan")
