"""Per-segment high-drag fractions of a plan made into time-tagged attitude-mode switches."""

from __future__ import annotations

import numpy as np


def realise_duty_schedule(seg_t0_s, seg_t1_s, duty, t_now_s, *, slew_s=0.0, min_dwell_s=0.0,
                          high_mode="max_drag", low_mode="min_drag", current_mode=None,
                          end_mode=None):
    """Turn per-segment high-drag fractions into time-tagged mode switches.

    In segment ``s`` the high-drag mode is held for ``duty[s]`` of its length ``L``, centred in the
    segment (so the mean acceleration and its first moment over the segment match the planner's
    constant-acceleration model). With ``dwell = max(min_dwell_s, slew_s)`` each duty is first
    quantised on its own: a spell shorter than ``dwell`` is dropped (``duty L < dwell`` -> 0) and a
    low-drag remainder shorter than twice ``dwell`` is filled (``(1 - duty) L < 2 dwell`` -> 1).
    Then every high-drag spell and every low-drag gap between spells lasts at least ``dwell``
    (a gap between two centred spells is the sum of two half-remainders), and the realised duty of
    a segment depends on that segment only. A slew is modelled as an instantaneous change at its
    midpoint, so a switch is commanded ``slew_s / 2`` before the instant it should take effect, and
    never before ``t_now_s`` (then it takes effect half a slew after ``t_now_s``).

    Parameters
    ----------
    seg_t0_s, seg_t1_s, duty : np.ndarray, shape (S,)
    t_now_s : float
        Earliest allowed command time, s.
    slew_s, min_dwell_s : float
        Slew duration and shortest dwell, s.
    high_mode, low_mode : str
    current_mode : str, optional
        Mode the spacecraft is commanded to now (no switch is emitted into it).
    end_mode : str, optional
        Mode to take effect at the end of the last segment (e.g. the formation-keeping mode).

    Returns
    -------
    switches : list of (float, str)
        Time-ordered ``(t_s, mode)`` commands, all ``>= t_now_s``, no two equal modes in a row.
    realised_duty : np.ndarray, shape (S,)
        High-drag fraction per segment that the switches produce (at their effective times).
    """
    s0 = np.asarray(seg_t0_s, dtype=float)
    s1 = np.asarray(seg_t1_s, dtype=float)
    d = np.clip(np.asarray(duty, dtype=float), 0.0, 1.0)
    S = s0.size
    if S == 0:
        sw = [] if end_mode is None or end_mode == current_mode else [(float(t_now_s), end_mode)]
        return sw, np.zeros(0)
    dwell = max(float(min_dwell_s), float(slew_s), 0.0)
    L = s1 - s0
    q = np.where(d * L < max(dwell, 1e-9), 0.0, d)
    q = np.where((1.0 - q) * L < 2.0 * dwell, np.where(q > 0, 1.0, 0.0), q)
    q = np.where(q > 1.0 - 1e-12, 1.0, q)
    mid = 0.5 * (s0 + s1)
    half = 0.5 * q * L
    a0s, a1s = (mid - half)[q > 0], (mid + half)[q > 0]
    if a1s.size < 2 or np.all(np.diff(a1s) >= 0):
        # spells in time order (segments do not overlap): a spell joins the previous one when it
        # starts within 1e-6 s of its end, and a merged spell ends where its last member ends
        first = np.ones(a1s.size, dtype=bool)
        first[1:] = ~(a0s[1:] - a1s[:-1] < 1e-6)
        starts = np.nonzero(first)[0]
        ends = np.concatenate([starts[1:] - 1, [a1s.size - 1]]).astype(int) if a1s.size else starts
        m0, m1 = a0s[starts], a1s[ends]
    else:  # overlapping segments (not from segment_grid): merge one spell at a time
        merged = []
        for a0, a1 in zip(a0s, a1s):
            if merged and a0 - merged[-1][1] < 1e-6:
                merged[-1][1] = max(merged[-1][1], a1)
            else:
                merged.append([a0, a1])
        m0 = np.array([m[0] for m in merged])
        m1 = np.array([m[1] for m in merged])
    t_start, t_end = float(s0[0]), float(s1[-1])
    # effective (time, mode) events: [low at the start], then per spell high (and low after it
    # unless it runs to the end), [end mode]
    names = [low_mode, high_mode] + ([] if end_mode is None else [end_mode])
    ids = {}
    code = np.array([ids.setdefault(n, len(ids)) for n in names])
    pair_t = np.column_stack([np.maximum(m0, t_start), m1]).ravel()
    pair_c = np.tile(code[[1, 0]], m0.size)
    pair_keep = np.ones(pair_t.size, dtype=bool)
    pair_keep[1::2] = m1 < t_end - 1e-9
    lead = m0.size == 0 or m0[0] > t_start + 1e-9
    ev_t = np.concatenate([[t_start] if lead else [], pair_t[pair_keep],
                           [] if end_mode is None else [t_end]])
    ev_c = np.concatenate([code[:1] if lead else [], pair_c[pair_keep],
                           [] if end_mode is None else code[2:]]).astype(int)
    # an event into the mode already commanded is no switch
    prev = np.concatenate([[ids.get(current_mode, -1)], ev_c[:-1]])
    keep = ev_c != prev
    ev_t, ev_c = ev_t[keep], ev_c[keep]
    tc_all = np.maximum(ev_t - 0.5 * slew_s, float(t_now_s))
    te_all = np.where(tc_all > ev_t - 0.5 * slew_s + 1e-9, tc_all + 0.5 * slew_s, ev_t)
    mode_of = {i: n for n, i in ids.items()}
    if tc_all.size < 2 or not np.any(tc_all[1:] <= tc_all[:-1] + 1e-9):
        # no two commands at one instant: every kept event is a switch, modes alternate
        ms = [mode_of[c] for c in ev_c.tolist()]
        clean = list(zip(tc_all.tolist(), ms))
        eff = list(zip(te_all.tolist(), ms))
    else:
        switches, eff = [], []
        for tc, te_real, c in zip(tc_all.tolist(), te_all.tolist(), ev_c.tolist()):
            m = mode_of[c]
            if switches and tc <= switches[-1][0] + 1e-9:
                switches[-1] = (switches[-1][0], m)  # two commands at one instant: the later wins
                eff[-1] = (eff[-1][0], m)
            else:
                switches.append((tc, m))
                eff.append((te_real, m))
        clean, last = [], current_mode
        for tc, m in switches:
            if m != last:
                clean.append((tc, m))
                last = m
    # high-drag time per segment: the cumulative high-drag time H(t) is piecewise linear with
    # breaks at the (time-ordered) effective switches, so each segment's is H(s1) - H(s0)
    timeline = [(t_start, current_mode)] + eff
    te = np.maximum.accumulate(np.array([t for t, _ in timeline] + [t_end]))
    high = np.array([m == high_mode for _, m in timeline], dtype=float)
    H = np.concatenate([[0.0], np.cumsum(high * np.diff(te))])
    realised = np.interp(s1, te, H) - np.interp(s0, te, H)
    realised = np.where(L > 0, realised / np.maximum(L, 1e-300), 0.0)
    return clean, np.clip(realised, 0.0, 1.0)
