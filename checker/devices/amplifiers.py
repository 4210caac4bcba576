"""Operational amplifiers: a high-gain differential amplifier whose output stays inside its rails.

Pins (plus, minus, out, rail_hi, rail_lo). The inputs draw no current. The output
voltage is
    Vout = smax(Vlo + swing, smin(Vhi - swing, Vmid + gain (V+ - V-))),
with Vmid = (Vhi + Vlo) / 2, the open-loop output measured from mid-rail, and
smooth corners 5 mV wide (see `checker.devices.smooth`): exactly linear with the
given gain between the limits, clipping smoothly at `swing` inside each rail.
Defaults: gain 1e5 (100 dB, common practice for a general-purpose part), swing 0 V.
During gain stepping (`checker.solver.newton`) the gain is capped at `gain_cap`.

The output current j (pushed out of `out`) comes from the rails: the part sourcing
current takes it from rail_hi, sinking it returns it to rail_lo. The split is
smax(j, 0) into rail_hi and the rest, j - smax(j, 0), into rail_lo, with a smooth
corner 1 uA wide: the pin currents sum to zero exactly (Kirchhoff's current law)
and the power the part absorbs, sum of pin voltage x pin current, is what the output
stage dissipates. No quiescent supply current is modelled.
"""

from __future__ import annotations

from typing import Sequence

import numpy as np

from checker.design import Part
from checker.devices.base import Device, EdgeKind, Edges, NonlinearStamp, Triplets, prop_array, reject
from checker.devices.power import SMOOTH_V
from checker.devices.smooth import combine, smooth_max, smooth_min, stamp
from checker.units import format_value

SMOOTH_I = 1e-6  # A: width of the smooth corner where the output current changes rail


class Opamp(Device):
    """`opamp`: see the module docstring for the model."""

    kind = "opamp"
    pins = ("plus", "minus", "out", "rail_hi", "rail_lo")
    nonlinear = True
    GAIN = 1e5

    def __init__(self, parts: Sequence[Part], nodes: np.ndarray, first_branch: int, ambient: float):
        super().__init__(parts, nodes, first_branch, ambient)
        self.n_branches = len(self.parts)
        self.branch = first_branch + np.arange(self.n_branches)
        self.gain = prop_array(self.parts, "gain", self.GAIN)
        reject(~(self.gain > 0), self.parts, lambda p: f"opamp {p.name} needs a gain above zero")
        self.swing = prop_array(self.parts, "swing", 0.0)
        reject(~(self.swing >= 0), self.parts, lambda p: f"opamp {p.name} has a negative swing")

    @classmethod
    def describe(cls, part: Part) -> str:
        return f"the op-amp {part.name}"

    def edges(self) -> Edges:
        """The output is held against the rails; the rails supply its current. Inputs: no DC path."""
        rows = np.arange(len(self.parts))
        _, _, out, hi, lo = self.nodes.T
        kinds = np.concatenate([np.full(rows.size, EdgeKind.VOLTAGE), np.full(rows.size, EdgeKind.CURRENT)])
        return Edges(np.concatenate([out, hi]), np.concatenate([lo, out]), kinds, np.concatenate([rows, rows]))

    def matrix(self) -> Triplets:
        """j leaves at `out`; the branch row starts with v(out)."""
        out, j = self.nodes[:, 2], self.branch
        ones = np.ones(j.size)
        return Triplets(np.concatenate([out, j]), np.concatenate([j, out]), np.concatenate([-ones, ones]))

    def open_loop_gains(self) -> np.ndarray:
        return self.gain

    def _gain(self) -> np.ndarray:
        """The open-loop gain (V/V) in use: the declared one, capped during gain stepping."""
        return np.minimum(self.gain, self.gain_cap)

    def _output(self, x: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """The output voltage (V) and its slopes against v(plus), v(minus), v(rail_hi), v(rail_lo)."""
        plus, minus, _, hi, lo = (x[self.nodes[:, k]] for k in range(5))
        swing, gain = self.scale * self.swing, self._gain()
        wanted = 0.5 * (hi + lo) + gain * (plus - minus)
        below_hi, w_hi = smooth_min(hi - swing, wanted, SMOOTH_V)
        vout, w_lo = smooth_max(lo + swing, below_hi, SMOOTH_V)
        through = (1.0 - w_lo) * (1.0 - w_hi)  # d vout / d wanted
        slopes = np.column_stack([through * gain, -through * gain,
                                  (1.0 - w_lo) * w_hi + 0.5 * through, w_lo + 0.5 * through])
        return vout, slopes

    def first_guess(self, x: np.ndarray) -> NonlinearStamp:
        """The unclamped amplifier, Vout = Vmid + gain (V+ - V-): linear, so the first solve
        already sees the feedback. With the clamp, a guess whose rails still sit at 0 V would
        start with the output pinned, where its slope no longer shows the feedback."""
        gain = self._gain()
        slopes = np.column_stack([gain, -gain, np.full(gain.size, 0.5), np.full(gain.size, 0.5)])
        plus, minus, _, hi, lo = self.nodes.T
        wanted = slopes[:, 2] * (x[hi] + x[lo]) + gain * (x[plus] - x[minus])
        return self._stamp(x, wanted, slopes)

    def _beyond(self, x: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """How far (V) the open-loop output lies above the upper limit and below the lower one;
        both are linear in x."""
        plus, minus, _, hi, lo = (x[self.nodes[:, k]] for k in range(5))
        wanted = 0.5 * (hi + lo) + self._gain() * (plus - minus)
        swing = self.scale * self.swing
        return wanted - (hi - swing), (lo + swing) - wanted

    def limit(self, x_new: np.ndarray, x_old: np.ndarray) -> np.ndarray:
        """Op-amp limiting: a step may not carry the open-loop output from inside its range, or from
        beyond one limit, to beyond the other limit (or from inside to beyond either); it is cut where
        the open-loop output reaches that limit. Pinned at a limit, the output's slope no longer shows
        the feedback, and a high-gain loop would flip between the rails from one iteration to the next."""
        fraction = 1.0
        for old, new in zip(self._beyond(x_old), self._beyond(x_new)):
            crossing = (new > 0.0) & (old < 0.0)  # starting exactly at a limit must still move
            if np.any(crossing):
                fraction = min(fraction, float(np.min(old[crossing] / (old[crossing] - new[crossing]))))
        return x_old + max(fraction, 0.0) * (x_new - x_old)

    def _rails(self, j: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """Current (A) into rail_hi and its slope against j; rail_lo takes j minus it."""
        return smooth_max(j, np.zeros_like(j), SMOOTH_I)

    def evaluate(self, x: np.ndarray) -> NonlinearStamp:
        return self._stamp(x, *self._output(x))

    def _stamp(self, x: np.ndarray, vout: np.ndarray, slopes: np.ndarray) -> NonlinearStamp:
        """The branch rows' -vout with its slopes, and the rails' share of the output current."""
        j = x[self.branch]
        into_hi, d_hi = self._rails(j)
        plus, minus, _, hi, lo = self.nodes.T
        branch = stamp(self.branch[:, None], -vout[:, None], np.column_stack([plus, minus, hi, lo]), -slopes[:, None, :])
        rails = stamp(np.column_stack([hi, lo]), np.column_stack([into_hi, j - into_hi]), self.branch[:, None],
                      np.column_stack([d_hi, 1.0 - d_hi])[:, :, None])
        return combine(branch, rails)

    def trouble(self, x: np.ndarray) -> list[tuple[Part, str]]:
        """Op-amps whose rail_hi is below rail_lo: the model would clamp the output to a range
        turned inside out and report a state no part can be in. Equal rails (an unpowered part,
        say in a case with its supply absent) hold the output at that voltage, which is real."""
        hi, lo = x[self.nodes[:, 3]], x[self.nodes[:, 4]]
        return [(self.parts[k], f"{self.describe(self.parts[k])} has rail_hi at {format_value(hi[k], 'V')}, "
                                f"below rail_lo at {format_value(lo[k], 'V')}: check how its supply pins are wired")
                for k in np.flatnonzero(~(hi >= lo))]

    def pin_currents(self, x: np.ndarray) -> np.ndarray:
        j = x[self.branch]
        into_hi, _ = self._rails(j)
        zero = np.zeros_like(j)
        return np.column_stack([zero, zero, -j, into_hi, j - into_hi])
