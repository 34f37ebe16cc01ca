"""Steady-state thermal-resistance network and the coupled electro-thermal fixed point.

The ``thermal`` layer sits between ``losses/`` and ``solver``: plain Python data and numpy
arrays in, arrays out, no design objects. :func:`build_network` turns named nodes (component
junctions or hot spots, their case nodes, heatsinks, the board) and the resistances between
them into a conductance matrix with the ambient grounded, checks that every node has a path to
the ambient, and factorises the matrix once into the transfer resistances Z = G⁻¹. One matrix
product then gives every node's temperature for every operating point at once.
:func:`solve_coupled` closes the loop between temperature and loss, T = T_a + Z·P(T), for many
operating points together, iterating from the ambient so that a loss model that rises with
temperature settles on its lower, stable root, and flags thermal runaway (a node past a
physical ceiling, or a loop gain of one or more across the network) per point (SPEC §2.7,
REFERENCES §9).

The temperatures computed here are estimates from datasheet-level resistances. A hot part can
burn a user or start a fire; confirm temperatures by measurement on the real assembly, and
follow the applicable safety standards, local codes and licensed engineering practice.
"""

from __future__ import annotations

from collections.abc import Callable, Sequence
from dataclasses import dataclass

import numpy as np
from numpy.typing import ArrayLike

__all__ = [
    "AMBIENT",
    "CoupledSolution",
    "ThermalNetwork",
    "build_network",
    "solve_coupled",
]

AMBIENT = "ambient"
"""Reserved node name of the ambient, the network's ground (a fixed temperature)."""

_ZERO_C_IN_K = 273.15


@dataclass(frozen=True, slots=True, kw_only=True, eq=False)
class ThermalNetwork:
    """Steady-state thermal-resistance network with the ambient grounded.

    Build it with :func:`build_network`, which validates the input; the fields are read-only.

    Parameters
    ----------
    nodes : tuple of str
        Names of the heat-carrying nodes, in matrix order; the ambient is not among them. [-]
    resistances : tuple of (str, str, float)
        The resistances as given, ``(node_a, node_b, r)``, ``"ambient"`` for the ambient;
        r in [K/W]. [K/W]
    conductance : ndarray, shape (n, n)
        Reduced conductance matrix G (ambient row and column removed), symmetric and positive
        definite. [W/K]
    transfer_resistance : ndarray, shape (n, n)
        Z = G⁻¹: entry (i, j) is the rise of node i per watt injected at node j. [K/W]

    Notes
    -----
    Each resistance R between nodes a and b is a conductance g = 1/R stamped into G
    (G_aa += g, G_bb += g, G_ab −= g, G_ba −= g; a resistance to the ambient adds to the
    diagonal only), so resistances in parallel between the same pair add as conductances,
    1/R = Σ 1/R_i, and resistances in series add, R = Σ R_i (the conduction analogy [4]_).
    The steady rises solve G·ΔT = P, hence ΔT = Z·P and T = T_a + Z·P.

    The resistances follow the JEDEC definitions, each (T_J − T_X)/P_H in its own test set-up:
    θJA to the ambient in the still-air enclosure on the standard test board [1]_, θJC to the
    case with the heat forced through the case surface [3]_ (standard number from memory,
    verify), θJB to the board by the ring cold plate [2]_. A datasheet θJA describes the JEDEC
    test board, not the user's board: it compares packages and is at best a rough path in a
    design. ΨJT = (T_J − T_T)/P_H is a thermal *characterisation parameter*, not a resistance:
    only part of P_H leaves through the package top, so ΨJT must never be put into this
    network; it serves only as T_J = T_T + ΨJT·P from a measured top temperature [1]_, [5]_.

    References
    ----------
    .. [1] JEDEC JESD51-2, "Integrated circuits thermal test method environment conditions -
       natural convection (still air)", 1995 (JESD51-2A, 2008); θJA, and ΨJT in clause 4.
    .. [2] JEDEC JESD51-8, "Integrated circuit thermal test method environmental conditions -
       junction-to-board", 1999; θJB.
    .. [3] JEDEC JESD51-14, transient dual interface test method for θJC, 2010 (from memory,
       verify).
    .. [4] J. P. Holman, *Heat Transfer*, 10th ed., McGraw-Hill, 2010, steady conduction and
       the thermal-resistance (electrical) analogy.
    .. [5] JEDEC JESD51-12, "Guidelines for reporting and using electronic package thermal
       information", 2005.
    """

    nodes: tuple[str, ...]
    resistances: tuple[tuple[str, str, float], ...]
    conductance: np.ndarray
    transfer_resistance: np.ndarray

    def __post_init__(self) -> None:
        n = len(self.nodes)
        for name in ("conductance", "transfer_resistance"):
            value = getattr(self, name)
            if not isinstance(value, np.ndarray) or value.shape[-2:] != (n, n):
                raise ValueError(f"{name} must be an ndarray of shape (..., {n}, {n})")

    def index(self, name: str) -> int:
        """Position of a node in the matrices and in the last axis of the arrays.

        Parameters
        ----------
        name : str
            Node name, one of :attr:`nodes`. [-]

        Returns
        -------
        int
            Its index. [-]

        Raises
        ------
        ValueError
            Where the network has no node of that name (the ambient has no index).
        """
        try:
            return self.nodes.index(name)
        except ValueError:
            raise ValueError(
                f"the thermal network has no node {name!r}; its nodes are "
                f"{', '.join(self.nodes)}"
            ) from None

    def temperature_rise(self, power: ArrayLike) -> np.ndarray:
        """Steady rise of every node above the ambient for given node powers.

        Parameters
        ----------
        power : array_like, shape (..., n)
            Heat injected at each node, last axis in the order of :attr:`nodes`; any leading
            axes (operating points, grids) broadcast. [W]

        Returns
        -------
        ndarray, shape (..., n)
            Rise of each node above the ambient. [K]

        Raises
        ------
        ValueError
            Where the last axis of ``power`` is not the number of nodes.

        Notes
        -----
        ΔT = Z·P per operating point, one matrix product for all of them (see
        :class:`ThermalNetwork`).

        References
        ----------
        .. [1] J. P. Holman, *Heat Transfer*, 10th ed., McGraw-Hill, 2010, the
           thermal-resistance analogy.
        """
        power = np.asarray(power, dtype=float)
        n = len(self.nodes)
        if power.ndim == 0 or power.shape[-1] != n:
            raise ValueError(
                f"power must have the {n} nodes ({', '.join(self.nodes)}) on its last axis, "
                f"got shape {power.shape}"
            )
        return power @ self.transfer_resistance.T

    def temperatures(self, power: ArrayLike, *, ambient: ArrayLike) -> np.ndarray:
        """Absolute temperature of every node for given node powers.

        Parameters
        ----------
        power : array_like, shape (..., n)
            Heat injected at each node, last axis in the order of :attr:`nodes`. [W]
        ambient : array_like, shape broadcastable to (...)
            Ambient temperature of each operating point (the leading axes of ``power``). [degC]

        Returns
        -------
        ndarray, shape (..., n)
            Temperature of each node. [degC]

        Notes
        -----
        T = T_a + Z·P.

        References
        ----------
        .. [1] J. P. Holman, *Heat Transfer*, 10th ed., McGraw-Hill, 2010, the
           thermal-resistance analogy.
        """
        ambient = np.asarray(ambient, dtype=float)
        return ambient[..., np.newaxis] + self.temperature_rise(power)


def build_network(
    nodes: Sequence[str], resistances: Sequence[tuple[str, str, float]]
) -> ThermalNetwork:
    """Conductance matrix of a thermal-resistance network, factorised once.

    Parameters
    ----------
    nodes : sequence of str
        Names of the heat-carrying nodes: junctions or hot spots (``"switch"``,
        ``"rectifier"``, ``"inductor"``, ``"cout"``), case nodes (``"switch.case"``), sinks
        (``"heatsink"``, ``"board"``). Unique, non-empty, never ``"ambient"``. [-]
    resistances : sequence of (str, str, float)
        ``(node_a, node_b, r)``: a resistance r between two nodes, or between a node and
        ``"ambient"``. Several between the same pair are in parallel. r positive and finite;
        a JEDEC θ (see :class:`ThermalNetwork`), never a ΨJT. An r given as a 1-D array
        (one value per design variant) makes the network a stack of networks of one
        topology: the matrices gain a leading variant axis, shape (variants, n, n), factorised
        together. [K/W]

    Returns
    -------
    ThermalNetwork
        The network with its conductance matrix and transfer resistances. [K/W]

    Raises
    ------
    ValueError
        Naming the offending entry: an empty, duplicate or reserved node name; a resistance
        naming an unknown node or joining a node to itself; a resistance that is not a
        positive finite number; the node(s) with no path to the ambient; a conductance matrix
        that is not numerically positive definite.

    Notes
    -----
    G_ii = Σ_k 1/R_ik over every resistance at node i (to the ambient too), G_ij = −Σ 1/R_ij;
    G is symmetric and, when every node reaches the ambient, positive definite (a grounded
    weighted Laplacian). It is factorised once by Cholesky, G = L·Lᵀ, and Z = G⁻¹ = L⁻ᵀ·L⁻¹
    is stored: for a few to a few dozen nodes the dense inverse is the fastest form for
    many right-hand sides. Series resistances add, parallel ones add as conductances [1]_.

    References
    ----------
    .. [1] J. P. Holman, *Heat Transfer*, 10th ed., McGraw-Hill, 2010, steady conduction and
       the thermal-resistance (electrical) analogy.
    .. [2] JEDEC JESD51-2, 1995 (JESD51-2A, 2008); JESD51-8, 1999; JESD51-12, 2005: the
       definitions of θJA, θJB and ΨJT the resistances follow.
    """
    names = tuple(nodes)
    problems = []
    for name in names:
        if not isinstance(name, str) or not name:
            problems.append(f"node names must be non-empty strings, got {name!r}")
        elif name == AMBIENT:
            problems.append(f"{AMBIENT!r} is reserved for the ambient and cannot be a node")
    duplicates = sorted({name for name in names if names.count(name) > 1}, key=str)
    if duplicates:
        problems.append(f"duplicate node name(s): {', '.join(map(str, duplicates))}")
    if not names:
        problems.append("the thermal network needs at least one node")
    if problems:
        raise ValueError("; ".join(problems))

    position = {name: i for i, name in enumerate(names)}
    n = len(names)
    conductance = np.zeros((n, n))
    links: list[tuple[str, str, float]] = []
    neighbours: dict[str, set[str]] = {name: set() for name in (*names, AMBIENT)}
    for entry in resistances:
        try:
            node_a, node_b, r = entry
        except (TypeError, ValueError):
            problems.append(f"a resistance must be (node_a, node_b, r_k_per_w), got {entry!r}")
            continue
        label = f"resistance {node_a!r}-{node_b!r}"
        unknown = [x for x in (node_a, node_b) if x not in neighbours]
        if unknown:
            problems.append(
                f"{label}: unknown node(s) {', '.join(map(repr, unknown))}; the nodes are "
                f"{', '.join(names)} and {AMBIENT!r}"
            )
            continue
        if node_a == node_b:
            problems.append(f"{label}: joins a node to itself")
            continue
        try:
            r = np.asarray(r, dtype=float)
        except (TypeError, ValueError):
            problems.append(f"{label}: expected a number in K/W, got {r!r}")
            continue
        if r.ndim > 1 or not np.all(np.isfinite(r) & (r > 0.0)):
            problems.append(f"{label}: expected a positive finite resistance in K/W, got {r!r}")
            continue
        r = float(r) if r.ndim == 0 else r
        if np.ndim(r) and np.ndim(conductance) == 2:
            # one network per variant: a stack of matrices along a leading axis
            conductance = np.repeat(conductance[np.newaxis], np.size(r), axis=0)
        g = 1.0 / r
        for a, b in ((node_a, node_b), (node_b, node_a)):
            if a != AMBIENT:
                conductance[..., position[a], position[a]] += g
                if b != AMBIENT:
                    conductance[..., position[a], position[b]] -= g
        neighbours[node_a].add(node_b)
        neighbours[node_b].add(node_a)
        links.append((node_a, node_b, r))
    if problems:
        raise ValueError("; ".join(problems))

    reached = {AMBIENT}
    frontier = [AMBIENT]
    while frontier:
        for other in neighbours[frontier.pop()] - reached:
            reached.add(other)
            frontier.append(other)
    isolated = [name for name in names if name not in reached]
    if isolated:
        raise ValueError(
            f"no path to {AMBIENT!r} from node(s) {', '.join(isolated)}: every node needs a "
            f"chain of resistances to the ambient"
        )

    try:
        lower = np.linalg.cholesky(conductance)
    except np.linalg.LinAlgError:
        raise ValueError(
            "the conductance matrix is not numerically positive definite: the resistances "
            "span too wide a range"
        ) from None
    lower_inv = np.linalg.inv(lower)
    transfer = np.swapaxes(lower_inv, -1, -2) @ lower_inv
    transfer = 0.5 * (transfer + np.swapaxes(transfer, -1, -2))
    conductance.setflags(write=False)
    transfer.setflags(write=False)
    return ThermalNetwork(
        nodes=names,
        resistances=tuple(links),
        conductance=conductance,
        transfer_resistance=transfer,
    )


@dataclass(frozen=True, slots=True, kw_only=True, eq=False)
class CoupledSolution:
    """Result of :func:`solve_coupled`, one row per operating point.

    Parameters
    ----------
    nodes : tuple of str
        Node names, the order of the last axis of ``temperatures`` and ``powers``. [-]
    temperatures : ndarray, shape (npoints, n)
        Node temperatures at the fixed point; NaN where runaway, not converged or undefined.
        [degC]
    powers : ndarray, shape (npoints, n)
        Node powers from the loss model at the solution; NaN likewise. [W]
    iterations : ndarray of int, shape (npoints,)
        Fixed-point iterations (loss-model evaluations) spent on each point, not counting
        the final Jacobian evaluations. [-]
    loop_gain : ndarray, shape (npoints,)
        Spectral radius of Z·∂P/∂T at the solution; where the point is not solved, the last
        estimate from the iteration (NaN where there was none). [-]
    runaway : ndarray of bool, shape (npoints,)
        Thermal runaway: a node passed the ceiling, or the loop gain reached one. [-]
    not_converged : ndarray of bool, shape (npoints,)
        Still iterating after ``max_iter`` iterations. [-]
    undefined : ndarray of bool, shape (npoints,)
        The loss model returned NaN on the way (not a runaway). [-]
    reason : ndarray of str, shape (npoints,)
        Why a point has no solution, ``""`` where it solved. [-]
    last_temperatures : ndarray, shape (npoints, n)
        Where the point ran away or did not converge, the node temperatures of the last
        iteration (the last one below ``ceiling`` where a node passed it): diverging, not a
        solution, for a report to show where it was heading; NaN elsewhere. [degC]
    """

    nodes: tuple[str, ...]
    temperatures: np.ndarray
    powers: np.ndarray
    iterations: np.ndarray
    loop_gain: np.ndarray
    runaway: np.ndarray
    not_converged: np.ndarray
    undefined: np.ndarray
    reason: np.ndarray
    last_temperatures: np.ndarray

    @property
    def solved(self) -> np.ndarray:
        """Points with a stable, converged solution. [-]"""
        return ~(self.runaway | self.not_converged | self.undefined)


def _heated_columns(heated, network: ThermalNetwork) -> np.ndarray:
    """Indices of the nodes whose temperature the losses depend on, validated."""
    n = len(network.nodes)
    if heated is None:
        return np.arange(n)
    columns = []
    for item in heated:
        if isinstance(item, str):
            columns.append(network.index(item))
        elif isinstance(item, int | np.integer) and 0 <= int(item) < n:
            columns.append(int(item))
        else:
            raise ValueError(f"heated: expected node names or indices 0..{n - 1}, got {item!r}")
    columns = np.unique(np.asarray(columns, dtype=int))
    if columns.size == 0:
        raise ValueError("heated: name at least one node whose losses depend on temperature")
    return columns


def _call_power(power_of, temperatures, index, n):
    """Call the loss model and check the shape of what it returns."""
    power = np.asarray(power_of(temperatures, index), dtype=float)
    if power.shape != (index.size, n):
        raise ValueError(
            f"power_of must return node powers of shape ({index.size}, {n}), "
            f"got {power.shape}"
        )
    return power


def solve_coupled(
    power_of: Callable[[np.ndarray, np.ndarray], ArrayLike],
    network: ThermalNetwork,
    *,
    ambient: ArrayLike,
    tol: float = 0.01,
    max_iter: int = 300,
    ceiling: float = 300.0,
    heated: Sequence[int | str] | None = None,
    transfer: ArrayLike | None = None,
) -> CoupledSolution:
    """Coupled electro-thermal fixed point T = T_a + Z·P(T) over many points.

    Parameters
    ----------
    power_of : callable
        The loss model, ``power_of(temperatures, index)``: ``temperatures`` of shape (m, n)
        are node temperatures [degC] of the operating points ``index`` (an integer array of
        m distinct positions into ``ambient``, in increasing order); it returns the heat
        injected at each node, shape (m, n), NaN at a point where the model is undefined.
        Nodes without loss (cases, sinks) return zero. [W]
    network : ThermalNetwork
        The thermal network, from :func:`build_network`. [K/W]
    ambient : array_like, shape (npoints,)
        Ambient temperature of each operating point, finite. [degC]
    tol : float, optional
        Accepted estimated error of every node temperature (0.01 K by default, SPEC §2.7). [K]
    max_iter : int, optional
        Iterations before a point is reported not converged. [-]
    ceiling : float, optional
        Physical ceiling: a node past it is a thermal runaway. Separate from, and above, every
        part's own temperature limit, which the limit check applies later. [degC]
    heated : sequence of int or str, optional
        Nodes whose temperature the losses depend on (the Jacobian's columns); every node by
        default. Naming fewer saves loss-model calls; leaving out a node the losses do depend
        on understates the loop gain. [-]
    transfer : array_like, shape (npoints, n, n), optional
        Transfer resistances per operating point, where the points belong to design variants
        whose networks share the topology of ``network`` but not its resistances (a stack
        from :func:`build_network`, taken at each point's variant); ``network``'s own by
        default. [K/W]

    Returns
    -------
    CoupledSolution
        Temperatures, powers, iterations, loop gain and the per-point flags and reasons. [-]

    Raises
    ------
    ValueError
        On a non-finite ambient, non-positive ``tol``, ``max_iter`` < 1, a non-finite
        ``ceiling``, a bad ``heated`` entry, or a ``power_of`` result of the wrong shape.

    Notes
    -----
    *Iteration.* T⁽⁰⁾ = T_a, T⁽ᵏ⁾ = T_a + Z·P(T⁽ᵏ⁻¹⁾), started from the ambient and never
    from a hot guess: for losses that rise with temperature the iterates then rise
    monotonically onto the lowest root, the stable one. Each iteration is one call of
    ``power_of`` and one matrix product on the points still active; solved and failed points
    leave the active set.

    *Stop.* With s_k = max_i |T_i⁽ᵏ⁾ − T_i⁽ᵏ⁻¹⁾| and the loop-gain estimate g_k = s_k/s_(k−1),
    the error of a contraction of factor g satisfies |T* − T⁽ᵏ⁾| ≤ g·s_k/(1 − g) [6]_. The
    test used is the conservative s_k/(1 − g) ≤ tol, a factor 1/g above that bound, with
    g = max(g_k, g_(k−1)) (two ratios, so that one lucky short step cannot stop the
    iteration); a step below the floating-point floor (16 eps of the absolute temperature)
    stops it too. Two successive estimates g_k, g_(k−1) ≥ 1 (the steps grow: the iterate is
    leaving) flag runaway; one alone may come from a loss that is steep near the ambient and
    then flattens. A node above ``ceiling`` flags runaway in any case.

    *Check.* At the accepted T the powers P = P(T) are evaluated and the reported
    temperatures are T_a + Z·P (one more step, so reported temperatures and powers satisfy
    the network exactly). The Jacobian is taken by forward differences, one call per heated
    node j, with the step h_j = sqrt(eps)·(T_j + 273.15 K) (about 6 µK at 100 degC), the
    step that balances truncation (∝ h) against rounding (∝ eps/h) for a model smooth on the
    scale of its absolute temperature [7]_, rounded so that T_j + h_j is exact. The loop gain
    is the spectral radius ρ(Z·∂P/∂T); with H the heated columns, its non-zero eigenvalues
    are those of the |H|×|H| matrix Z[H, :]·∂P/∂T[:, H]. The point is stable iff ρ < 1
    [5]_; ρ ≥ 1 flags runaway "(network)" even where the iteration stopped, since a network
    of parts each stable alone can be unstable together. For one part with
    P = P0·(1 + a·(T − T0)) the fixed point is T = (T_a + R·P0·(1 − a·T0))/(1 − a·R·P0),
    runaway iff a·R·P0 ≥ 1 (REFERENCES §9.5, derived).

    The resistances follow JEDEC JESD51-2, -8, -12 and -14 [1]_–[4]_; ΨJT is a
    characterisation parameter, never a resistance, and a datasheet θJA describes the JEDEC
    test board, not the user's (see :class:`ThermalNetwork`).

    References
    ----------
    .. [1] JEDEC JESD51-2, 1995 (JESD51-2A, 2008): θJA, and ΨJT in clause 4.
    .. [2] JEDEC JESD51-8, 1999: θJB.
    .. [3] JEDEC JESD51-12, 2005: reporting and using package thermal information.
    .. [4] JEDEC JESD51-14, 2010: θJC (from memory, verify).
    .. [5] J. Lutz, H. Schlangenotto, U. Scheuermann, R. De Doncker, *Semiconductor Power
       Devices*, Springer, 2011, electro-thermal feedback and thermal runaway (location not
       checked).
    .. [6] R. L. Burden, J. D. Faires, *Numerical Analysis*, fixed-point iteration, error
       bound of a contraction (section from memory).
    .. [7] W. H. Press et al., *Numerical Recipes*, 3rd ed., Cambridge, 2007, numerical
       derivatives (section 5.7 from memory).
    """
    ambient = np.atleast_1d(np.asarray(ambient, dtype=float))
    if ambient.ndim != 1:
        raise ValueError(f"ambient must be 1-D (one per operating point), got {ambient.shape}")
    if not np.all(np.isfinite(ambient)):
        raise ValueError("ambient must be finite at every operating point")
    if not (np.isfinite(tol) and tol > 0.0):
        raise ValueError(f"tol must be a positive number of kelvin, got {tol!r}")
    if int(max_iter) != max_iter or max_iter < 1:
        raise ValueError(f"max_iter must be a positive integer, got {max_iter!r}")
    if not np.isfinite(ceiling):
        raise ValueError(f"ceiling must be a finite temperature in degC, got {ceiling!r}")
    columns = _heated_columns(heated, network)

    npoints, n = ambient.size, len(network.nodes)
    if transfer is None:
        z = network.transfer_resistance
        if z.ndim != 2:
            raise ValueError("a stack of networks needs the per-point transfer resistances")
    else:
        z = np.asarray(transfer, dtype=float)
        if z.shape != (npoints, n, n):
            raise ValueError(f"transfer must have shape ({npoints}, {n}, {n}), got {z.shape}")

    def rise(power, index):
        if z.ndim == 2:
            return power @ z.T
        return np.einsum("pij,pj->pi", z[index], power)

    eps = np.finfo(float).eps
    accepted = np.full((npoints, n), np.nan)
    last = np.repeat(ambient[:, np.newaxis], n, axis=1)
    before = np.full((npoints, n), np.nan)  # a runaway's last iterate below the ceiling
    step_prev = np.full(npoints, np.nan)
    ratio_prev = np.full(npoints, np.nan)
    iterations = np.zeros(npoints, dtype=int)
    loop_gain = np.full(npoints, np.nan)
    error = np.full(npoints, np.nan)
    converged = np.zeros(npoints, dtype=bool)
    undefined = np.zeros(npoints, dtype=bool)
    over_ceiling = np.zeros(npoints, dtype=bool)
    gain_runaway = np.zeros(npoints, dtype=bool)
    active = np.arange(npoints)

    for iteration in range(1, int(max_iter) + 1):
        if active.size == 0:
            break
        t_old = last[active]
        power = _call_power(power_of, t_old, active, n)
        with np.errstate(invalid="ignore", over="ignore"):
            t_new = ambient[active, np.newaxis] + rise(power, active)
        iterations[active] = iteration
        bad = np.isnan(power).any(axis=1) | (np.isnan(t_new) | np.isneginf(t_new)).any(axis=1)
        hot = ~bad & (t_new > ceiling).any(axis=1)
        with np.errstate(invalid="ignore", divide="ignore"):
            step = np.abs(t_new - t_old).max(axis=1)
            ratio = step / step_prev[active]
            gain = np.maximum(ratio, ratio_prev[active])
            floor = 16.0 * eps * (np.abs(t_new).max(axis=1) + _ZERO_C_IN_K)
            estimate = step / (1.0 - gain)
            done = ~bad & ~hot & ((step <= floor) | ((gain < 1.0) & (estimate <= tol)))
            leaving = ~bad & ~hot & ~done & (np.minimum(ratio, ratio_prev[active]) >= 1.0)
        # a loss model that turns undefined (the stage cannot deliver at these temperatures)
        # while the steps were already growing is a runaway that went past the model's range
        diverged = bad & (ratio_prev[active] >= 1.0)
        bad_only = bad & ~diverged
        leaving = leaving | diverged
        ratio = np.where(diverged, ratio_prev[active], ratio)
        t_new = np.where(diverged[:, np.newaxis], t_old, t_new)
        loop_gain[active] = ratio
        error[active] = np.where(gain < 1.0, estimate, np.inf)
        undefined[active[bad_only]] = True
        over_ceiling[active[hot]] = True
        gain_runaway[active[leaving]] = True
        before[active[leaving]] = t_new[leaving]
        converged[active[done]] = True
        accepted[active[done]] = t_new[done]
        last[active[hot]] = t_new[hot]
        before[active[hot]] = t_old[hot]
        keep = ~(bad | hot | done | leaving)
        active = active[keep]
        last[active] = t_new[keep]
        step_prev[active] = step[keep]
        ratio_prev[active] = ratio[keep]
    not_converged = np.zeros(npoints, dtype=bool)
    not_converged[active] = True

    temperatures = np.full((npoints, n), np.nan)
    powers = np.full((npoints, n), np.nan)
    network_runaway = np.zeros(npoints, dtype=bool)
    solved = np.flatnonzero(converged)
    if solved.size:
        t_sol = accepted[solved]
        p_sol = _call_power(power_of, t_sol, solved, n)
        jacobian = np.empty((solved.size, n, columns.size))
        for k, j in enumerate(columns):
            t_pert = t_sol.copy()
            t_pert[:, j] += np.sqrt(eps) * np.abs(t_sol[:, j] + _ZERO_C_IN_K)
            h = t_pert[:, j] - t_sol[:, j]
            p_pert = _call_power(power_of, t_pert, solved, n)
            with np.errstate(invalid="ignore"):
                jacobian[:, :, k] = (p_pert - p_sol) / h[:, np.newaxis]
        finite = np.isfinite(p_sol).all(axis=1) & np.isfinite(jacobian).all(axis=(1, 2))
        if z.ndim == 2:
            loop = z[columns, :] @ jacobian[finite]
        else:
            loop = z[solved[finite]][:, columns, :] @ jacobian[finite]
        rho = np.abs(np.linalg.eigvals(loop)).max(axis=-1) if loop.size else np.zeros(0)
        with np.errstate(invalid="ignore", over="ignore"):
            t_final = ambient[solved[finite], np.newaxis] + rise(p_sol[finite], solved[finite])
        ok = solved[finite]
        loop_gain[ok] = rho
        undefined[solved[~finite]] = True
        passed = (t_final > ceiling).any(axis=1)
        over_ceiling[ok[passed]] = True
        last[ok[passed]] = t_final[passed]
        before[ok[passed]] = t_final[passed]
        unstable = ~passed & (rho >= 1.0)
        network_runaway[ok[unstable]] = True
        good = ~passed & ~unstable
        temperatures[ok[good]] = t_final[good]
        powers[ok[good]] = p_sol[finite][good]

    reason = np.full(npoints, "", dtype=object)
    reason[undefined] = "loss model undefined"
    hottest = np.argmax(np.where(np.isnan(last), -np.inf, last), axis=1)
    for j, name in enumerate(network.nodes):
        reason[over_ceiling & (hottest == j)] = (
            f"thermal runaway: node {name} passed {ceiling:g} degC"
        )
    for flag, where in ((gain_runaway, "iteration"), (network_runaway, "network")):
        if flag.any():
            reason[flag] = np.char.mod(
                f"thermal runaway: loop gain %.3f >= 1 ({where})", loop_gain[flag]
            )
    if not_converged.any():
        reason[not_converged] = np.char.mod(
            f"not converged after {int(max_iter)} iterations (estimated error %.3g K)",
            error[not_converged],
        )
    return CoupledSolution(
        nodes=network.nodes,
        temperatures=temperatures,
        powers=powers,
        iterations=iterations,
        loop_gain=loop_gain,
        runaway=over_ceiling | gain_runaway | network_runaway,
        not_converged=not_converged,
        undefined=undefined,
        reason=reason.astype(str),
        last_temperatures=np.where(
            (network_runaway | not_converged)[:, np.newaxis], last,
            np.where((over_ceiling | gain_runaway)[:, np.newaxis], before, np.nan)),
    )
