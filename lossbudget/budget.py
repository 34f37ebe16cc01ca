"""The result of a solve: losses by component and mechanism, temperatures, stresses, flags.

A :class:`Budget` holds arrays over the operating grid (the broadcast shape of the axes given
to :func:`lossbudget.solve`). A point flagged infeasible, runaway or not converged is NaN in
every number and carries its reason. The tables of SPEC §7 (loss, point and stress tables)
come from :meth:`Budget.loss_table`, :meth:`Budget.point_table` and :meth:`Budget.stress_table`
as pandas DataFrames (pandas is imported only there).
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any

import numpy as np

AXES = ("vin", "vout", "load", "ambient", "fsw")
AXIS_COLUMNS = {
    "vin": "vin_v",
    "vout": "vout_v",
    "load": "load_a",
    "ambient": "ambient_degc",
    "fsw": "fsw_hz",
}
NAN_FLAGS = ("infeasible", "runaway", "not_converged")
STRESS_QUANTITIES = ("i_avg", "i_rms", "i_pk", "v_pk", "v_overshoot", "b_pk", "delta_b")
STRESS_COLUMNS = {
    "i_avg": "i_avg_a",
    "i_rms": "i_rms_a",
    "i_pk": "i_pk_a",
    "v_pk": "v_pk_v",
    "v_overshoot": "v_overshoot_v",
    "b_pk": "b_pk_t",
    "delta_b": "delta_b_t",
}


@dataclass(frozen=True, slots=True, kw_only=True)
class MechanismStatus:
    """How a mechanism of a component was treated.

    ``kind`` is ``computed``, ``not_applicable`` or ``not_modelled``; ``note`` says why (the
    key that would enable a mechanism not modelled). ``zero_reason`` holds, per point, why a
    computed mechanism is zero by physics there ("" where it is not zero by physics).
    ``by_point`` serves design variants whose treatments differ: per point, the status text
    where the mechanism is not computed in that point's variant ("" where it is computed).
    """

    kind: str
    note: str = ""
    zero_reason: np.ndarray | None = None
    by_point: np.ndarray | None = None


@dataclass(frozen=True, slots=True, kw_only=True)
class Budget:
    """Loss budget over an operating grid (arrays of the grid's shape)."""

    design_name: str
    topology: str
    coords: dict[str, np.ndarray]
    losses: dict[tuple[str, str], np.ndarray]
    statuses: dict[tuple[str, str], MechanismStatus]
    temperatures: dict[str, np.ndarray]
    temperature_limits: dict[str, float]
    stresses: dict[tuple[str, str], np.ndarray]
    output_power: np.ndarray
    duty: np.ndarray
    d2: np.ndarray
    dcm: np.ndarray
    vout_pp: np.ndarray
    flags: dict[str, np.ndarray]
    reason: np.ndarray
    provenance: dict[str, Any]
    source_input_power: np.ndarray = field(repr=False)
    loop_gain: np.ndarray = field(repr=False)
    over_rating_reason: np.ndarray | None = field(default=None, repr=False)
    diverging_temperatures: dict[str, np.ndarray] = field(default_factory=dict, repr=False)
    variant_labels: tuple[str, ...] | None = None

    # -- derived figures -------------------------------------------------------------------

    @property
    def shape(self) -> tuple[int, ...]:
        """Shape of the operating grid."""
        return self.output_power.shape

    @property
    def total_loss(self) -> np.ndarray:
        """Sum of every loss row. [W]"""
        total = np.zeros(self.shape)
        for value in self.losses.values():
            total = total + value
        return total

    @property
    def input_power(self) -> np.ndarray:
        """Output power plus every loss. [W]"""
        return self.output_power + self.total_loss

    @property
    def efficiency(self) -> np.ndarray:
        """Output power over output power plus every loss. [-]"""
        with np.errstate(invalid="ignore", divide="ignore"):
            return self.output_power / self.input_power

    @property
    def mode(self) -> np.ndarray:
        """ "CCM" or "DCM" per point ("" where flagged)."""
        out = np.where(self.dcm, "DCM", "CCM").astype(object)
        return np.where(self.flagged, "", out)

    @property
    def flagged(self) -> np.ndarray:
        """True where a point is NaN (infeasible, runaway or not converged)."""
        bad = np.zeros(self.shape, dtype=bool)
        for name in NAN_FLAGS:
            bad = bad | self.flags[name]
        return bad

    @property
    def components(self) -> list[str]:
        """Components in the order of the budget."""
        seen: list[str] = []
        for component, _ in self.statuses:
            if component not in seen:
                seen.append(component)
        return seen

    def mechanisms(self, component: str) -> list[str]:
        """Mechanisms of a component."""
        return [m for c, m in self.statuses if c == component]

    @property
    def not_modelled(self) -> list[tuple[str, str, str]]:
        """(component, mechanism, the key that would enable it) for every mechanism left out."""
        return [(c, m, s.note) for (c, m), s in self.statuses.items() if s.kind == "not_modelled"]

    def loss(self, component: str, mechanism: str | None = None) -> np.ndarray:
        """Loss of one mechanism, or of all mechanisms of a component summed. [W]"""
        if mechanism is not None:
            key = (component, mechanism)
            if key not in self.statuses:
                raise KeyError(
                    f"no mechanism {mechanism!r} for component {component!r}; "
                    f"mechanisms: {', '.join(self.mechanisms(component))}"
                )
            return self.losses.get(key, np.where(self.flagged, np.nan, 0.0))
        if component not in self.components:
            raise KeyError(f"no component {component!r}; components: {', '.join(self.components)}")
        total = np.where(self.flagged, np.nan, 0.0)
        for (c, _), value in self.losses.items():
            if c == component:
                total = total + value
        return total

    def status(self, component: str, mechanism: str) -> np.ndarray:
        """Status string of a mechanism per point (computed, zero: why, not_modelled: key, ...)."""
        st = self.statuses[(component, mechanism)]
        if st.kind != "computed":
            text = f"{st.kind}: {st.note}" if st.note else st.kind
            return np.full(self.shape, text, dtype=object)
        out = np.full(self.shape, "computed", dtype=object)
        if st.zero_reason is not None:
            zr = np.broadcast_to(st.zero_reason, self.shape)
            out = np.where(zr != "", "zero: " + zr.astype(str).astype(object), out)
        out = np.where(self.flagged, "flagged", out)
        if st.by_point is not None:
            out = np.where(st.by_point != "", st.by_point, out)
        return out

    def temperature(self, node: str) -> np.ndarray:
        """Temperature of a thermal node. [degC]"""
        if node not in self.temperatures:
            raise KeyError(f"no thermal node {node!r}; nodes: {', '.join(self.temperatures)}")
        return self.temperatures[node]

    @property
    def rating_reasons(self) -> np.ndarray:
        """Per point, the parts and quantities past an absolute rating ("" where none)."""
        if self.over_rating_reason is None:
            return np.full(self.shape, "", dtype=object)
        return self.over_rating_reason

    def stress(self, component: str, quantity: str) -> np.ndarray:
        """A stress of a component: i_avg, i_rms, i_pk [A], v_pk, v_overshoot [V], b_pk,
        delta_b [T]."""
        key = (component, quantity)
        if key not in self.stresses:
            have = sorted({q for c, q in self.stresses if c == component})
            raise KeyError(
                f"no stress {quantity!r} for {component!r}; available: {', '.join(have) or 'none'}"
            )
        return self.stresses[key]

    # -- tables ----------------------------------------------------------------------------

    @property
    def variants(self) -> int | None:
        """Number of design variants along the first axis (None for a single design)."""
        return None if self.variant_labels is None else len(self.variant_labels)

    def _axes_frame(self) -> dict[str, np.ndarray]:
        flat = {AXIS_COLUMNS[a]: np.broadcast_to(self.coords[a], self.shape).ravel() for a in AXES}
        head: dict[str, np.ndarray] = {"point_id": np.arange(int(np.prod(self.shape)))}
        if self.variant_labels is not None:
            labels = np.asarray(self.variant_labels, dtype=object)
            head["variant"] = labels[np.broadcast_to(self.coords["variant"], self.shape).ravel()]
        return {**head, **flat}

    def point_table(self):
        """One row per operating point (SPEC §7)."""
        import pandas as pd

        cols: dict[str, Any] = self._axes_frame()
        cols["pin_w"] = self.input_power.ravel()
        cols["pout_w"] = self.output_power.ravel()
        cols["loss_w"] = self.total_loss.ravel()
        cols["efficiency"] = self.efficiency.ravel()
        cols["duty"] = self.duty.ravel()
        cols["d2"] = self.d2.ravel()
        cols["mode"] = self.mode.ravel()
        cols["reverse_current"] = self.flags["reverse_current"].ravel()
        cols["vout_pp_v"] = self.vout_pp.ravel()
        for node, temp in self.temperatures.items():
            cols[f"t_{node.replace('.', '_')}_degc"] = temp.ravel()
        flag = np.full(self.shape, "", dtype=object)
        for name in reversed(NAN_FLAGS):
            flag = np.where(self.flags[name], name, flag)
        cols["flag"] = flag.ravel()
        cols["reason"] = self.reason.ravel()
        cols["over_rating"] = self.rating_reasons.ravel()
        return pd.DataFrame(cols)

    def loss_table(self):
        """One row per operating point, component and mechanism (SPEC §7)."""
        import pandas as pd

        axes = self._axes_frame()
        n = len(axes["point_id"])
        total = self.total_loss.ravel()
        frames = []
        for (component, mechanism), _st in self.statuses.items():
            value = self.loss(component, mechanism).ravel()
            with np.errstate(invalid="ignore", divide="ignore"):
                share = value / total
            frames.append(
                pd.DataFrame(
                    {
                        **axes,
                        "component": np.full(n, component, dtype=object),
                        "mechanism": np.full(n, mechanism, dtype=object),
                        "loss_w": value,
                        "share": share,
                        "status": self.status(component, mechanism).ravel(),
                    }
                )
            )
        out = pd.concat(frames, ignore_index=True)
        return out.sort_values(["point_id"], kind="stable").reset_index(drop=True)

    def stress_table(self):
        """One row per operating point and component with its stresses (SPEC §7)."""
        import pandas as pd

        axes = self._axes_frame()
        n = len(axes["point_id"])
        comps = []
        for c, _ in self.stresses:
            if c not in comps:
                comps.append(c)
        frames = []
        for c in comps:
            cols = {"point_id": axes["point_id"], "component": np.full(n, c, dtype=object)}
            for q in STRESS_QUANTITIES:
                key = (c, q)
                cols[STRESS_COLUMNS[q]] = (
                    self.stresses[key].ravel() if key in self.stresses else np.full(n, np.nan)
                )
            frames.append(pd.DataFrame(cols))
        out = pd.concat(frames, ignore_index=True)
        return out.sort_values(["point_id"], kind="stable").reset_index(drop=True)
