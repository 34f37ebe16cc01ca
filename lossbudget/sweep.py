"""Sweeps over the operating envelope: outer grids of the axes, weighted efficiency figures.

One axis convention for every map: the axes given appear in the order vin, vout, load,
ambient, fsw, each along its own array axis (a map over input voltage and load has axis 0 the
input voltage and axis 1 the load).
"""

from __future__ import annotations

from lossbudget.budget import Budget
from lossbudget.design import Corner, Design
from lossbudget.solver import _solve


def sweep(design: Design, *, vin, load=None, load_fraction=None, vout=None, ambient=None,
          fsw=None, corner: Corner = "typ") -> Budget:
    """Solve the loss budget over the outer grid of the given axes.

    Parameters
    ----------
    design : Design
        A design from :func:`lossbudget.load_design`.
    vin : array_like
        Input voltages (1-D). [V]
    load : array_like, optional
        Output currents (1-D), positive magnitudes. [A]
    load_fraction : array_like, optional
        Output currents as fractions of the rated current, instead of ``load``. [-]
    vout, ambient, fsw : array_like, optional
        Further axes (1-D); the nominal values where omitted. [V], [degC], [Hz]
    corner : {"typ", "worst"}
        Part values.

    Returns
    -------
    Budget
        Arrays of shape (len(vin), [len(vout),] len(load), [len(ambient),] [len(fsw)]).
    """
    return _solve(design, vin=vin, load=load, load_fraction=load_fraction, vout=vout,
                  ambient=ambient, fsw=fsw, corner=corner, outer=True)
