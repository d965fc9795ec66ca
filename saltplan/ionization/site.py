"""Result types of the ionization step: :class:`Site`, :class:`Step`, :class:`PermanentCharge`."""
from __future__ import annotations

from dataclasses import dataclass
from typing import Any

#: acid sites above this pKa and base sites below this value cannot form salts
#: (domain primer §2.4: "base pKa below about 1, acid pKa above about 12")
SALT_ACID_MAX = 12.0
SALT_BASE_MIN = 1.0


@dataclass(frozen=True)
class Step:
    """One contribution to an estimated pKa.

    Attributes
    ----------
    label : str
        What the step is ("parent", "sigma_p 4-nitro", "alpha C=O", "charge at atom 7", ...).
    value : float
        Contribution in pKa units (the parent value for the first step).
    detail : str
        The arithmetic, e.g. ``"-2.23 x sigma_p- 1.27"``.
    source : str
        The table or rule the constant comes from.
    """

    label: str
    value: float
    detail: str = ""
    source: str = ""

    def to_dict(self) -> dict[str, Any]:
        return {"label": self.label, "value": round(self.value, 2), "detail": self.detail,
                "source": self.source}


@dataclass(frozen=True)
class Site:
    """An acidic or basic group of the parent molecule with its pKa.

    Attributes
    ----------
    atom : int
        Index in ``Parent.mol`` of the ionizable atom (acid: the H-bearing atom; base: the
        atom that takes the proton).
    kind : str
        ``"acid"`` or ``"base"``; a base's pKa is that of its conjugate acid.
    pka : float
        Estimated or measured pKa (aqueous, 25 °C).
    uncertainty : float
        Expected error [pKa units] from the calibration residuals of the class.
    group, group_id : str
        Human-readable class name and catalogue id.
    steps : tuple of Step
        Parent value, substituent contributions, corrections (and, for a measured site,
        the replaced estimate).
    provenance : str
        ``"estimated"`` or ``"measured"``.
    source : str
        ``"user"`` for measured values; the rule and table names for estimates.
    """

    atom: int
    kind: str
    pka: float
    uncertainty: float
    group: str
    group_id: str
    steps: tuple[Step, ...] = ()
    provenance: str = "estimated"
    source: str = ""

    @property
    def salt_relevant(self) -> bool:
        """True when the site can take part in salt formation (acid pKa <= 12, base pKa >= 1)."""
        if self.kind == "acid":
            return self.pka <= SALT_ACID_MAX
        return self.pka >= SALT_BASE_MIN

    def to_dict(self) -> dict[str, Any]:
        return {
            "atom": self.atom,
            "kind": self.kind,
            "pka": round(self.pka, 2),
            "uncertainty": round(self.uncertainty, 2),
            "group": self.group,
            "group_id": self.group_id,
            "provenance": self.provenance,
            "source": self.source,
            "salt_relevant": self.salt_relevant,
            "steps": [s.to_dict() for s in self.steps],
        }


@dataclass(frozen=True)
class PermanentCharge:
    """A permanently charged atom (quaternary ammonium, N-alkyl azinium): no pKa."""

    atom: int
    charge: int
    group: str
    group_id: str

    def to_dict(self) -> dict[str, Any]:
        return {"atom": self.atom, "charge": self.charge, "group": self.group,
                "group_id": self.group_id}
