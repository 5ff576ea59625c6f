"""Bulk conversion of logged EMF arrays with numpy: the core's PCHIP, vectorised.

`convert_array(table, emf_mv)` gives, for every element, what the core's
scalar `Table.convert` gives (pressure within 1e-9 relative, the same
state): it evaluates the very segment coefficients the core computed
(`Table.segments()`), so the two cannot drift apart.

Results: `pressure_pa`, float64, NaN where the state is invalid; `state`,
uint8 codes indexing `STATES` (0 ok, 1 under, 2 over, 3 invalid), e.g.
`bulk.STATES[code]` is the gaugecore.states string.
"""

import math

import numpy as np

from gaugecore import states

STATES = (states.OK, states.UNDER, states.OVER, states.INVALID)
OK, UNDER, OVER, INVALID = 0, 1, 2, 3


def state_names(codes):
    """uint8 state codes -> array of the gaugecore.states strings."""
    return np.asarray(STATES, dtype=object)[np.asarray(codes)]


def convert_array(table, emf_mv):
    """EMF array (mV, referred to the table's ref_c) -> (pressure_pa, state) arrays.

    Any shape; NaN input is invalid. No Python loop per sample: one
    np.searchsorted for the segments, gathers with np.take and a Horner
    evaluation in place, in blocks of BLOCK samples so the work arrays stay
    in cache. Differs from the core only by rounding (the core also clamps
    each result to its segment and returns the knots' own pressures exactly;
    both change only the last bits).
    """
    e = np.asarray(emf_mv, dtype=np.float64)
    flat = e.ravel()
    seg = [np.asarray(a, dtype=np.float64) for a in table.segments()]
    xs, ys, c1, c2, c3 = seg[0], seg[1], seg[3], seg[4], seg[5]
    x_left, y_left = xs[:-1].copy(), ys[:-1].copy()
    p = np.empty(flat.shape, dtype=np.float64)
    state = np.empty(flat.shape, dtype=np.uint8)
    m = min(BLOCK, flat.size)
    ec = np.empty(m)
    dx = np.empty(m)
    tmp = np.empty(m)
    idx = np.empty(m, dtype=np.intp)
    lim_hi, lim_lo = table.emf_invalid_above_mv, -table.noise_mv
    for start in range(0, flat.size, BLOCK):
        stop = min(start + BLOCK, flat.size)
        k = stop - start
        eb, ecb, dxb, tb, ib = flat[start:stop], ec[:k], dx[:k], tmp[:k], idx[:k]
        y = p[start:stop]
        # Beyond either end the core returns that end's pressure: evaluate at the end.
        np.clip(eb, xs[0], xs[-1], out=ecb)
        # Segment j holds xs[j] <= e < xs[j+1]; mode="clip" maps -1 -> 0 and n-1 -> n-2,
        # the last segment, as the core's binary search does.
        ib[:] = np.searchsorted(xs, ecb, side="right")
        ib -= 1
        np.take(x_left, ib, out=dxb, mode="clip")
        np.subtract(ecb, dxb, out=dxb)
        np.take(c3, ib, out=y, mode="clip")
        y *= dxb
        y += np.take(c2, ib, out=tb, mode="clip")
        y *= dxb
        y += np.take(c1, ib, out=tb, mode="clip")
        y *= dxb
        y += np.take(y_left, ib, out=tb, mode="clip")
        y *= _LN10
        np.exp(y, out=y)  # 10**y
        sb = state[start:stop]
        np.greater(eb, xs[-1], out=sb.view(np.bool_))  # UNDER == 1
        sb |= np.less(eb, xs[0]).view(np.uint8) << 1  # OVER == 2
        invalid = np.greater(eb, lim_hi)
        invalid |= np.less(eb, lim_lo)
        invalid |= np.isnan(eb)
        np.copyto(y, np.nan, where=invalid)
        np.copyto(sb, INVALID, where=invalid)
    return p.reshape(e.shape), state.reshape(e.shape)


BLOCK = 65536  # samples per block: the work arrays (~2 MB) stay in cache
_LN10 = math.log(10.0)
