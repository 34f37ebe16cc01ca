"""Turn-off voltage overshoot of a hard-switched MOSFET from its commutation loop.

Pure functions over operating points. When the main switch turns off, its current falls to
zero in the current-fall time t_fi while the rectifier takes it over; the commutation loop's
inductance (the input capacitors, the switch and the rectifier with their traces) sees that
di/dt and adds L_loop·I/t_fi to the blocking voltage across the switch. The limit check uses
it in place of the fixed ``limits.v_spike`` allowance, so the voltage check follows the current.
"""

from __future__ import annotations

import numpy as np


def turn_off_overshoot(l_loop, i_off, t_fi):
    """Voltage overshoot L_loop·I/t_fi of a switch's turn-off.

    Parameters
    ----------
    l_loop : array_like
        Inductance of the commutation loop. [H]
    i_off : array_like
        Current the switch turns off (its peak in a hard-switched stage). [A]
    t_fi : array_like
        Current-fall time of the turn-off, from the gate-charge timing. [s]

    Returns
    -------
    ndarray
        Overshoot above the blocking voltage; NaN where t_fi is not positive. [V]

    Notes
    -----
    v = L·di/dt with a linear current fall, di/dt = I/t_fi: the peak of the inductive spike,
    without the damping of the node capacitance (an upper estimate). Valid for a fall time
    longer than the loop's own ring period; shorter falls are limited by the node
    capacitance, which this estimate ignores (common practice).

    References
    ----------
    .. [1] N. Mohan, T. M. Undeland, W. P. Robbins, Power Electronics: Converters,
       Applications, and Design, 3rd ed., Wiley, 2003, ch. 2 (linearised switching
       waveforms) and the snubber chapter (overvoltage L_σ·di/dt at turn-off; chapter from
       memory); the inductor law v = L·di/dt.
    """
    t_fi = np.asarray(t_fi, dtype=float)
    with np.errstate(divide="ignore", invalid="ignore"):
        return np.where(t_fi > 0, np.asarray(l_loop, dtype=float) * np.abs(i_off) / t_fi, np.nan)
