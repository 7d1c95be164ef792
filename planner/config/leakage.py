"""The ``[device.leakage]`` section: how qubits leave the computational subspace, what a leaked
qubit does to its gate partners and its own readout, and what brings it back.

The model follows the ingredients of Miao, McEwen et al., "Overcoming leakage in quantum error
correction", Nat. Phys. (2023), arXiv:2211.04728 (leakage from two-qubit gates and heating,
transport across CZ gates, partner errors, multi-level reset of measure qubits, data-qubit
leakage removal) and McEwen et al., Nat. Commun. 12, 1761 (2021) (leakage builds up on data
qubits over rounds, measure qubits are cleared by their reset). The simplifications are ours:

- a qubit is leaked or not (one leaked level, no |3>); every rate is a per-event probability;
- a leaked qubit's effect on a gate partner is one Pauli channel per gate (``partner_px``,
  ``partner_py``, ``partner_pz``), whatever the gate and the leaked level;
- decay back (``decay_per_round``) and the data-qubit removal step (``data_removal``) act once
  per round, at the end of the round's readout layer; a qubit that returns this way comes back in
  a random computational state; a qubit cleared by its reset comes back in the reset state;
- heating (``heating_per_us``) acts on every qubit, each layer, for the layer's duration.

Absent section: no leakage, and nothing about circuits, tasks or strong ids changes.
"""

from __future__ import annotations

from typing import Literal

from pydantic import model_validator

from planner.config.types import Frozen, Probability

_Probability = Probability

#: the fields the component scale ``leakage`` multiplies (the injection rates)
SCALED_FIELDS: tuple[str, ...] = ("gate_2q", "heating_per_us")
#: the removal efficiencies (a lever: 1 removes all leakage at that step, 0 none)
REMOVAL_FIELDS: tuple[str, ...] = ("reset_removal", "data_removal")


class Leakage(Frozen):
    """Leakage of the device (see the module doc). Probabilities in [0, 1]; efficiencies in [0, 1]."""

    #: probability that a two-qubit gate leaks each participating qubit
    gate_2q: _Probability = 0.0
    #: leakage probability per microsecond (every qubit, every layer: 1 - exp(-rate * t))
    heating_per_us: _Probability = 0.0
    #: probability per round that a leaked qubit decays back to a computational state
    decay_per_round: _Probability = 0.0
    #: probability that a leaked qubit leaks its gate partner through a two-qubit gate
    transport: _Probability = 0.0
    #: Pauli channel a leaked qubit puts on each gate partner, per two-qubit gate
    partner_px: _Probability = 0.25
    partner_py: _Probability = 0.25
    partner_pz: _Probability = 0.25
    #: what a leaked qubit reads out: always 1, or a random bit
    readout: Literal["one", "random"] = "one"
    #: efficiency of the measure-qubit reset at removing leakage (1: multi-level reset)
    reset_removal: _Probability = 0.0
    #: efficiency of a data-qubit leakage-removal step each round (0: no such step)
    data_removal: _Probability = 0.0

    @model_validator(mode="after")
    def _partner_channel(self) -> Leakage:
        total = self.partner_px + self.partner_py + self.partner_pz
        if total > 1.0 + 1e-12:
            raise ValueError(f"partner_px + partner_py + partner_pz = {total:g} is above 1: "
                             "the partner channel's probabilities must add up to at most 1")
        return self

    def scaled(self, factor: float) -> Leakage:
        """A copy with the injection rates (:data:`SCALED_FIELDS`) times ``factor`` (capped at 1).

        >>> Leakage(gate_2q=1e-3).scaled(0.5).gate_2q
        0.0005
        """
        return self.model_copy(update={k: min(1.0, getattr(self, k) * factor) for k in SCALED_FIELDS})

    @property
    def injects(self) -> bool:
        """Whether anything ever leaks (an all-zero section leaks nothing)."""
        return any(getattr(self, k) > 0 for k in SCALED_FIELDS)


def leakage_axis_problem(*, has_section: bool, components: tuple[str, ...] | None) -> tuple[str, str] | None:
    """``sweep.components`` names ``leakage`` but the device has no ``[device.leakage]``: the
    component is zero there, so it has nothing to scale.

    >>> leakage_axis_problem(has_section=False, components=("gate_2q", "leakage"))[0]
    'sweep.components'
    """
    if not has_section and components and "leakage" in components:
        return ("sweep.components", "'leakage' needs a [device.leakage] section (without one the "
                "device has no leakage to scale): add the section or remove 'leakage'")
    return None
