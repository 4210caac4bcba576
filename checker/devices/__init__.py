"""Part kinds the solver can stamp, one class per kind, registered by kind name.

A class in `DEVICES` stands for all the parts of its kind in one netlist (see
`checker.devices.base.Device`), so stamps are built with numpy over the group.

How to add a kind
-----------------
1. Write a class in the module of its family (`passives`, `sources`, ...), with
   `kind = "name"` and `pins` (the kind table's pin order; ("from", "to") by default).
2. In `__init__(parts, nodes, first_branch, ambient)` (call `super().__init__` first)
   turn the parts' values into arrays and reject bad ones with `reject(...)`, which
   raises `DesignError` at the part. Extra unknowns (branch currents) are numbered
   from `first_branch`; set `self.n_branches` to how many you use.
3. Implement:
   - `edges()`: the DC paths between pins (`EdgeKind.CONDUCTIVE`, `VOLTAGE` or
     `CURRENT`), used to diagnose floating nets, source loops and cut sets before
     any matrix is factorised. A pin with no DC path (a gate) gets no edge.
   - `matrix()` / `sources()`: the constant part of the stamp (coordinate triplets
     and right-hand-side entries). Row/column -1 is ground and is dropped.
   - `pin_currents(x)`: current into each pin, shape (parts, pins).
   - `describe(part)` if "the <kind> <name>" does not say it well.
   A linear two-terminal kind only needs `elements()` on `LinearTwoTerminal`.
4. Nonlinear kinds set `nonlinear = True` and implement `evaluate(x)`, returning a
   `NonlinearStamp` of residual currents leaving each net into the device and their
   derivatives for the whole group in one numpy pass (`checker.devices.smooth.stamp`
   builds one from per-part arrays); the triplet layout must not depend on `x`.
   `limit(x_new, x_old)` may shorten a Newton step (junction-voltage limiting);
   `first_guess(x)` may replace the stamp of the linear solve that starts Newton;
   `trouble(x)` names parts whose converged state lies outside their model; built-in
   setpoints follow `self.scale` during source stepping (volts and amps times the
   scale, watts times its square); an amplifying kind returns its gains from
   `open_loop_gains()` and caps them at `self.gain_cap` during gain stepping. `x`
   always carries a trailing 0.0 so that index -1 reads ground. docs/models.md describes every model.
5. Register the class in `DEVICES` below and add a test file under tests/unit/solver/.
"""

from __future__ import annotations

from checker.devices.amplifiers import Opamp
from checker.devices.base import Device
from checker.devices.diodes import Diode, Led, Zener
from checker.devices.passives import Capacitor, Inductor, Resistor, Switch
from checker.devices.power import Converter, Regulator
from checker.devices.sources import Load, Source
from checker.devices.transistors import Bjt, Mosfet

DEVICES: dict[str, type[Device]] = {
    cls.kind: cls for cls in (Resistor, Capacitor, Inductor, Switch, Source, Load,
                              Diode, Led, Zener, Bjt, Mosfet, Regulator, Converter, Opamp)
}

__all__ = ["DEVICES", "Device"]
