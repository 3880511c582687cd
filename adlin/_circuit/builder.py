"""`Circuit`: build a `System` from elements between named nodes."""

from __future__ import annotations

import contextlib
import functools
from collections.abc import Callable, Mapping
from typing import Any

import jax
import numpy as np

from .._errors import ModelError
from .._system import System
from . import laws
from .assembly import Assembly, Layout
from .controlled import Cccs, Ccvs, Vccs, Vcvs
from .elements import AbstractElement, Capacitor, CurrentSource, Inductor, Resistor, VoltageSource
from .nonlinear import Device, TwoTerminal
from .outputs import make_probe
from .small_signal import (
    SmallSignal,
    bias_vector,
    bjt_summary,
    mosfet_summary,
    small_signal_table,
)
from .topology import check_connected, check_names, junction_table
from .values import LAW_UNITS, Ref, ValueTable


class Circuit:
    """A circuit of elements between named nodes, turned into a `System`.

    The equations are written by modified nodal analysis in charge form
    (Ho, Ruehli & Brennan, IEEE Trans. Circuits Syst. 22(6), 1975), matching
    ``d/dt q(x, p) + f(x, u, p) = 0``:

    - unknowns: the voltage ``v_<node>`` of every node but ground, in order of
      first use, then the branch current ``i_<element>`` of every inductor,
      voltage source, VCVS and CCVS, in order of creation;
    - a node row of f is the sum of currents LEAVING the node through the
      elements; its row of q is the sum of charges the elements hold on it;
    - an inductor's branch row is ``d/dt (L i) - (v_a - v_b) = 0``; a voltage
      source's is ``v_a - v_b - V = 0``.

    Branch currents flow from the first node through the element to the
    second; for a voltage source that is the current entering its + node
    from outside (a battery delivering power has a negative current).  A
    current source of value I takes I out of its first node and delivers it
    to its second.

    Nodes are created on first use.  The ground node has voltage zero and no
    unknown; its name is given to the constructor, and ``"0"`` always means
    ground too.

    Every element value becomes a named parameter (or refers to a declared
    one, or to an input), so it can be overridden, swept and differentiated:
    a number passed as an element's main value creates the parameter named
    after the element (``"R1"``), a number passed as a device parameter
    creates ``"<element>.<parameter>"`` (``"D1.saturation_current"``), and a
    string names a parameter or input declared earlier with `param` or
    `input`.  Values stored in charges and fluxes (capacitance, inductance,
    device parameters) must be parameters, because ``q(x, p)`` does not see
    the inputs.

    Every element method returns the element's name.

    **Arguments:**

    - `name`: a label for the System.
    - `ground`: the name of the ground node.

    **Example:**

        c = adlin.Circuit("divider")
        c.input("v_in", 5.0, unit="V")
        c.voltage_source("V1", "in", "gnd", "v_in")
        c.resistor("R1", "in", "out", 10e3)
        c.resistor("R2", "out", "gnd", 10e3)
        c.output("v_out", "out")
        sys = c.build()
    """

    def __init__(self, name: str = "circuit", *, ground: str = "gnd"):
        if not isinstance(ground, str) or not ground:
            raise ModelError(f"ground must be one node name (a non-empty string), got {ground!r}.")
        self.name = str(name)
        self.ground = ground
        self._values = ValueTable()
        self._nodes: dict[str, None] = {}
        self._elements: dict[str, AbstractElement] = {}
        self._outputs: dict[str, tuple[Any, str | None]] = {}
        self._version = 0
        self._cache: tuple[int, System, Assembly, Callable] | None = None

    # -- declarations ----------------------------------------------------------
    def param(self, name: str, default: float, *, unit: str = "") -> str:
        """Declare a parameter that elements can refer to by name.

        **Arguments:**

        - `name`: the parameter's name in ``System.params``.
        - `default`: its default value (SI units).
        - `unit`: unit for reports, e.g. ``"ohm"``.

        **Returns:** the name.
        """
        self._values.declare("param", name, default, unit)
        self._version += 1
        return name

    def input(self, name: str, default: float = 0.0, *, unit: str = "") -> str:
        """Declare a System input (an independent source value, typically).

        **Arguments:**

        - `name`: the input's name in ``System.inputs``; it must differ from
          the unknowns, so do not call it ``"v_<node>"`` for one of your nodes.
        - `default`: its default value.
        - `unit`: unit for reports, e.g. ``"V"``.

        **Returns:** the name.
        """
        self._values.declare("input", name, default, unit)
        self._version += 1
        return name

    # -- linear elements ---------------------------------------------------------
    def resistor(self, name: str, a: str, b: str, resistance: float | str) -> str:
        """A linear resistor; current ``(v_a - v_b) / R`` flows from a to b.

        **Arguments:**

        - `name`: element name (also the parameter name for a number).
        - `a`, `b`: node names.
        - `resistance`: ohms, a number or a declared parameter/input name.
        """
        owner = self._start("resistor", name)
        a, b = self._two_nodes(owner, a, b)
        with self._transaction():
            r = self._value(owner, "resistance", resistance, name, "ohm")
            if r.kind == "param" and self._values.default(r) == 0.0:
                raise ModelError(
                    f"{owner} has zero resistance, which is a short circuit; use "
                    "a 0 V voltage source, or a small resistance."
                )
            return self._add(Resistor(name, a, b, r))

    def capacitor(self, name: str, a: str, b: str, capacitance: float | str) -> str:
        """A linear capacitor; charge ``C (v_a - v_b)`` on a and its negative on b.

        **Arguments:**

        - `name`, `a`, `b`: as for `resistor`.
        - `capacitance`: farads, a number or a declared parameter name.
        """
        return self._linear_two_node(Capacitor, name, a, b, "capacitance", capacitance, "F",
                                     allow_input=False)

    def inductor(self, name: str, a: str, b: str, inductance: float | str) -> str:
        """A linear inductor; adds the unknown ``i_<name>``, flowing from a to b.

        **Arguments:**

        - `name`, `a`, `b`: as for `resistor`.
        - `inductance`: henries, a number or a declared parameter name.
        """
        return self._linear_two_node(Inductor, name, a, b, "inductance", inductance, "H",
                                     allow_input=False)

    def voltage_source(self, name: str, plus: str, minus: str, voltage: float | str) -> str:
        """An independent voltage source, ``v_plus - v_minus = V``.

        Adds the unknown ``i_<name>``: the current entering the source at
        `plus` from the circuit and leaving it at `minus` (negative when the
        source delivers power).

        **Arguments:**

        - `name`: element name.
        - `plus`, `minus`: node names.
        - `voltage`: volts, a number, a declared parameter or an input name.
        """
        return self._linear_two_node(VoltageSource, name, plus, minus, "voltage", voltage, "V")

    def current_source(self, name: str, a: str, b: str, current: float | str) -> str:
        """An independent current source: I flows out of node a, through the
        source, into node b.

        **Arguments:**

        - `name`: element name.
        - `a`, `b`: node names.
        - `current`: amperes, a number, a declared parameter or an input name.
        """
        return self._linear_two_node(CurrentSource, name, a, b, "current", current, "A")

    def vccs(
        self,
        name: str,
        out_plus: str,
        out_minus: str,
        ctrl_plus: str,
        ctrl_minus: str,
        transconductance: float | str,
    ) -> str:
        """A voltage-controlled current source.

        The current ``gm (v_ctrl_plus - v_ctrl_minus)`` flows from `out_plus`
        through the source to `out_minus`; the control terminals draw nothing.

        **Arguments:**

        - `name`: element name.
        - `out_plus`, `out_minus`, `ctrl_plus`, `ctrl_minus`: node names.
        - `transconductance`: siemens, a number or a declared parameter/input name.
        """
        owner = self._start("vccs", name)
        a, b = self._two_nodes(owner, out_plus, out_minus)
        c, d = self._two_nodes(owner, ctrl_plus, ctrl_minus, what="control")
        with self._transaction():
            gm = self._value(owner, "transconductance", transconductance, name, "S")
            return self._add(Vccs(name, a, b, c, d, gm))

    def vcvs(
        self,
        name: str,
        out_plus: str,
        out_minus: str,
        ctrl_plus: str,
        ctrl_minus: str,
        gain: float | str,
    ) -> str:
        """A voltage-controlled voltage source, ``v_out = gain * v_ctrl``.

        Adds the unknown ``i_<name>``, entering at `out_plus` as for a voltage
        source.

        **Arguments:**

        - `name`: element name.
        - `out_plus`, `out_minus`, `ctrl_plus`, `ctrl_minus`: node names.
        - `gain`: dimensionless, a number or a declared parameter/input name.
        """
        owner = self._start("vcvs", name)
        a, b = self._two_nodes(owner, out_plus, out_minus)
        c, d = self._two_nodes(owner, ctrl_plus, ctrl_minus, what="control")
        with self._transaction():
            return self._add(Vcvs(name, a, b, c, d, self._value(owner, "gain", gain, name, "V/V")))

    def cccs(
        self, name: str, out_plus: str, out_minus: str, control: str, gain: float | str
    ) -> str:
        """A current-controlled current source.

        The current ``gain * i_<control>`` flows from `out_plus` through the
        source to `out_minus`.

        **Arguments:**

        - `name`: element name.
        - `out_plus`, `out_minus`: node names.
        - `control`: name of the element whose branch current controls this
          one (an inductor, voltage source, VCVS or CCVS; it may be added later).
        - `gain`: dimensionless, a number or a declared parameter/input name.
        """
        owner = self._start("cccs", name)
        a, b = self._two_nodes(owner, out_plus, out_minus)
        with self._transaction():
            return self._add(
                Cccs(name, a, b, str(control), self._value(owner, "gain", gain, name, "A/A"))
            )

    def ccvs(
        self, name: str, out_plus: str, out_minus: str, control: str, transresistance: float | str
    ) -> str:
        """A current-controlled voltage source, ``v_out = r * i_<control>``.

        Adds the unknown ``i_<name>``, entering at `out_plus`.

        **Arguments:**

        - `name`, `out_plus`, `out_minus`, `control`: as for `cccs`.
        - `transresistance`: ohms, a number or a declared parameter/input name.
        """
        owner = self._start("ccvs", name)
        a, b = self._two_nodes(owner, out_plus, out_minus)
        with self._transaction():
            r = self._value(owner, "transresistance", transresistance, name, "ohm")
            return self._add(Ccvs(name, a, b, str(control), r))

    # -- nonlinear elements ------------------------------------------------------
    def two_terminal(
        self,
        name: str,
        a: str,
        b: str,
        *,
        current: Callable[[Any, dict], Any] | None = None,
        charge: Callable[[Any, dict], Any] | None = None,
        params: Mapping[str, float | str] | None = None,
        units: Mapping[str, str] | None = None,
        junction: bool = False,
    ) -> str:
        """A nonlinear two-terminal element given by its laws.

        **Arguments:**

        - `name`: element name.
        - `a`, `b`: node names; ``v = v_a - v_b``.
        - `current`: ``current(v, p)``, the current flowing from a through the
          element to b (pure JAX, scalar).
        - `charge`: ``charge(v, p)``, the charge stored on a (its negative on b).
        - `params`: the element's parameters, local name -> number (creates
          ``"<name>.<local>"``) or declared parameter name; `p` holds them
          under their local names.
        - `units`: optional local name -> unit, for reports.
        - `junction`: True for a pn junction (anode a, cathode b), so the
          Newton solver limits its voltage steps; uses the params
          ``saturation_current``, ``emission_coefficient`` and ``temperature``
          when present (defaults 1e-14 A, 1, 300.15 K).
        """
        owner = self._start("two-terminal element", name)
        a, b = self._two_nodes(owner, a, b)
        _check_laws(owner, current, charge)
        with self._transaction():
            pmap = self._device_params(owner, name, params, units)
            return self._add(
                TwoTerminal(name, a, b, current, charge, pmap, junction=bool(junction))
            )

    def device(
        self,
        name: str,
        terminals: Mapping[str, str],
        *,
        currents: Callable[[dict, dict], Mapping[str, Any]] | None = None,
        charges: Callable[[dict, dict], Mapping[str, Any]] | None = None,
        params: Mapping[str, float | str] | None = None,
        units: Mapping[str, str] | None = None,
        junctions: tuple[tuple[str, str], ...] = (),
    ) -> str:
        """A nonlinear device with named terminals given by its laws.

        **Arguments:**

        - `name`: element name.
        - `terminals`: terminal name -> node name, e.g.
          ``{"d": "out", "g": "in", "s": "gnd", "b": "gnd"}``.
        - `currents`: ``currents(v, p)`` with `v` a dict terminal -> voltage;
          returns a dict terminal -> current INTO the device (terminals left
          out carry none).  For charge conservation they should sum to zero.
        - `charges`: ``charges(v, p)``, a dict terminal -> charge on it.
        - `params`, `units`: as for `two_terminal`.
        - `junctions`: pairs ``(anode terminal, cathode terminal)`` of pn
          junctions for Newton step limiting (see `two_terminal`).
        """
        owner = self._start("device", name)
        _check_laws(owner, currents, charges, what=("currents", "charges"))
        pairs = self._terminals(owner, terminals, None)
        for pair in junctions:
            if len(pair) != 2 or any(t not in dict(pairs) for t in pair):
                raise ModelError(
                    f"{owner} junction {pair!r} must be a pair of its terminals "
                    f"{[t for t, _ in pairs]}."
                )
        with self._transaction():
            pmap = self._device_params(owner, name, params, units)
            return self._add(
                Device(
                    name,
                    pairs,
                    currents,
                    charges,
                    pmap,
                    junctions=tuple(tuple(j) for j in junctions),
                )
            )

    def diode(self, name: str, anode: str, cathode: str, **law_params: float | str) -> str:
        """A pn diode with the Shockley law of `adlin.devices`.

        **Arguments:**

        - `name`: element name.
        - `anode`, `cathode`: node names.
        - `**law_params`: keywords of ``adlin.devices.diode_current`` and
          ``diode_charge`` (``saturation_current``, ``emission_coefficient``,
          ``temperature``, ``zero_bias_capacitance``, ``transit_time``, ...), each a
          number or a declared parameter name.  Each becomes the parameter
          ``"<name>.<keyword>"``; the charge law is used only if one of its own
          keywords is given.
        """
        owner = self._start("diode", name)
        a, k = self._two_nodes(owner, anode, cathode)
        dev = laws.devices()
        values, ckeys, qkeys = laws.bind(owner, dev.diode_current, dev.diode_charge, law_params)
        current = functools.partial(laws.call_branch, dev.diode_current, ckeys)
        charge = (
            None if qkeys is None else functools.partial(laws.call_branch, dev.diode_charge, qkeys)
        )
        with self._transaction():
            pmap = self._device_params(owner, name, values, None)
            return self._add(
                TwoTerminal(
                    name,
                    a,
                    k,
                    current,
                    charge,
                    pmap,
                    junction=True,
                    quantity_names=("i_d", "g_d", "c_d"),
                    kind="diode",
                )
            )

    def bjt(
        self,
        name: str,
        *,
        c: str | None = None,
        b: str | None = None,
        e: str | None = None,
        polarity: str = "npn",
        **law_params: float | str,
    ) -> str:
        """A bipolar transistor with the Ebers-Moll law of `adlin.devices`.

        Adds the base-emitter and base-collector junctions for Newton step
        limiting.  `small_signal` reports ``i_c, i_b, g_m, g_pi, g_o, beta,
        beta_dc`` and, with charges, ``c_be, c_bc``.

        **Arguments:**

        - `name`: element name.
        - `c`, `b`, `e`: collector, base and emitter node names.
        - `polarity`: ``"npn"`` or ``"pnp"``.
        - `**law_params`: keywords of ``adlin.devices.bjt_currents`` and
          ``bjt_charges`` (see `diode` for how they become parameters).
        """
        owner = self._start("bjt", name)
        sign = laws.polarity(owner, polarity, {"npn": 1, "pnp": -1})
        pairs = self._terminals(owner, {"c": c, "b": b, "e": e}, ("c", "b", "e"))
        dev = laws.devices()
        junctions = (("b", "e"), ("b", "c")) if sign > 0 else (("e", "b"), ("c", "b"))
        return self._law_device(owner, name, pairs, dev.bjt_currents, dev.bjt_charges, sign,
                                law_params, junctions=junctions, summary=bjt_summary, kind="bjt")

    def mosfet(
        self,
        name: str,
        *,
        d: str | None = None,
        g: str | None = None,
        s: str | None = None,
        b: str | None = None,
        polarity: str = "nmos",
        law: str = "ekv",
        **law_params: float | str,
    ) -> str:
        """A MOSFET with the EKV or square law of `adlin.devices`.

        `small_signal` reports ``i_d, g_m, g_ds, g_mb`` and, with charges,
        ``c_gs, c_gd, c_gb``.

        **Arguments:**

        - `name`: element name.
        - `d`, `g`, `s`: drain, gate and source node names.
        - `b`: bulk node name; None ties the bulk to the source.
        - `polarity`: ``"nmos"`` or ``"pmos"``.
        - `law`: ``"ekv"`` (default: one smooth expression from weak to strong
          inversion, which Newton handles well) or ``"square"``.
        - `**law_params`: keywords of ``adlin.devices.ekv_currents`` or
          ``square_law_currents`` and of ``mosfet_charges`` (capacitances), see
          `diode` for how they become parameters.
        """
        owner = self._start("mosfet", name)
        sign = laws.polarity(owner, polarity, {"nmos": 1, "pmos": -1})
        pairs = self._terminals(owner, {"d": d, "g": g, "s": s}, ("d", "g", "s"))
        bulk = pairs[2][1] if b is None else self._node(owner, b, "terminal 'b'")
        pairs = (*pairs, ("b", bulk))
        dev = laws.devices()
        choices = {"ekv": dev.ekv_currents, "square": dev.square_law_currents}
        if law not in choices:
            raise ModelError(f"{owner} law must be one of {list(choices)}, got {law!r}.")
        return self._law_device(owner, name, pairs, choices[law], dev.mosfet_charges, sign,
                                law_params, summary=mosfet_summary, kind="mosfet")

    def _law_device(self, owner, name, pairs, current_law, charge_law, sign, law_params,
                    **device_options) -> str:
        """Shared body of `bjt` and `mosfet`: bind an `adlin.devices` law pair to
        the terminals (in the order of `pairs`) and add the Device."""
        values, ckeys, qkeys = laws.bind(owner, current_law, charge_law, law_params)
        order = tuple(t for t, _ in pairs)
        current = functools.partial(laws.call_terminals, current_law, order, sign, ckeys)
        charge = (
            None
            if qkeys is None
            else functools.partial(laws.call_terminals, charge_law, order, sign, qkeys)
        )
        with self._transaction():
            pmap = self._device_params(owner, name, values, None)
            return self._add(Device(name, pairs, current, charge, pmap, **device_options))

    # -- outputs and building ----------------------------------------------------
    def output(self, name: str, what: Any, *, unit: str | None = None) -> str:
        """Declare an output of the System.

        **Arguments:**

        - `name`: the output's name in ``System.outputs``.
        - `what`: a node name (its voltage), a branch-current unknown name
          (``"i_L1"``), a node pair ``(a, b)`` for ``v_a - v_b``, or a function
          of a dict of every unknown, input and parameter by name returning a
          scalar.  Nodes are checked at `build`, so outputs may be declared
          before the elements.
        - `unit`: unit for reports (default: V for voltages, A for currents).

        **Returns:** the name.
        """
        if not isinstance(name, str) or not name:
            raise ModelError(f"an output name must be a non-empty string, got {name!r}.")
        if name in self._outputs:
            raise ModelError(f"output {name!r} is declared twice; choose another name.")
        self._outputs[name] = (what, unit)
        self._version += 1
        return name

    @property
    def nodes(self) -> tuple[str, ...]:
        """Non-ground node names, in order of first use."""
        return tuple(self._nodes)

    @property
    def elements(self) -> tuple[str, ...]:
        """Element names, in order of creation."""
        return tuple(self._elements)

    def build(self) -> System:
        """The circuit as an `adlin.System`.

        The model functions are pure JAX (jit, vmap and grad safe) and are
        traced once here with the default values to catch structural
        mistakes early.

        **Raises:**

        - `ModelError` for an empty circuit, an output naming no node, a
          current-controlled source without a controlling branch, or a name
          used twice (for example an input called ``"v_<node>"``).
        - `FloatingNodeError` when no element reaches ground, or some nodes
          are not connected to ground through any element.
        """
        if self._cache is not None and self._cache[0] == self._version:
            return self._cache[1]
        system, assembly = self._build()
        table = jax.jit(functools.partial(small_signal_table, assembly))
        self._cache = (self._version, system, assembly, table)
        return system

    def small_signal(self, op: Any, params: Mapping[str, Any] | None = None) -> SmallSignal:
        """Small-signal parameters of every nonlinear element at a bias point.

        Derivatives of each device law at its terminal voltages, by
        ``jax.jacfwd``: diodes ``i_d, g_d, c_d``; BJTs ``i_c, i_b, g_m, g_pi,
        g_o, beta, beta_dc`` (+ ``c_be, c_bc`` with charges); MOSFETs ``i_d,
        g_m, g_ds, g_mb`` (+ ``c_gs, c_gd, c_gb``); two-terminal elements ``i,
        g, c``; devices ``i[t]``, ``g[t,s] = dI_t/dV_s``, ``c[t,s] = dQ_t/dV_s``.

        **Arguments:**

        - `op`: the bias: an operating point or dict giving a value for every
          unknown by name (``op["v_out"]``), or the vector x itself.
        - `params`: parameter overrides (defaults otherwise; if None and `op`
          has a dict attribute ``params``, that is used).

        **Returns:** a `SmallSignal` table, ``table["Q1"]["g_m"]``, with
        ``table.units``.
        """
        system = self.build()
        assert self._cache is not None
        x = bias_vector(op, system.unknowns)
        if params is None and isinstance(getattr(op, "params", None), Mapping):
            params = op.params
        return self._cache[3](x, system.param_dict(system.param_vector(params)))

    def __repr__(self) -> str:
        return (
            f"Circuit({self.name!r}: {len(self._nodes)} nodes, {len(self._elements)} "
            f"elements, {len(self._values.params)} params, {len(self._values.inputs)} "
            "inputs)"
        )

    # -- internals -----------------------------------------------------------------
    def _build(self) -> tuple[System, Assembly]:
        if not self._elements:
            raise ModelError(f"circuit {self.name!r} has no elements; add some before build().")
        for element in self._elements.values():
            element.check(self._elements)
        elements = tuple(self._elements.values())
        check_connected(self.name, elements, tuple(self._nodes), self.ground)
        branches = [e.name for e in elements if e.has_branch]
        layout = Layout(tuple(self._nodes), branches, self.ground, tuple(self._values.inputs))
        check_names(layout, self._values)
        probes, units = [], {}
        for out_name, (what, unit) in self._outputs.items():
            probe, natural = make_probe(
                out_name, what, layout, self._canon, tuple(self._values.inputs)
            )
            probes.append(probe)
            units[out_name] = natural if unit is None else unit
        assembly = Assembly(layout, elements, probes)
        units.update({u: ("V" if u.startswith("v_") else "A") for u in layout.unknowns})
        units.update(self._values.units)
        system = System(
            current=assembly.current,
            charge=assembly.charge if assembly.storage else None,
            output=assembly.output if probes else None,
            unknowns=layout.unknowns,
            inputs=dict(self._values.inputs),
            outputs=tuple(self._outputs),
            params=dict(self._values.params),
            units=units,
            junctions=junction_table(elements, layout, self._values),
            name=self.name,
        )
        x0 = np.zeros((layout.n,))
        u0, p0 = system.input_vector(), system.param_vector()
        jax.eval_shape(system.f, x0, u0, p0)
        jax.eval_shape(system.q, x0, p0)
        jax.eval_shape(system.g, x0, u0, p0)
        return system, assembly

    def _start(self, kind: str, name: Any) -> str:
        if not isinstance(name, str) or not name:
            raise ModelError(f"a {kind} needs a name (a non-empty string), got {name!r}.")
        if name in self._elements:
            raise ModelError(
                f"element name {name!r} is used twice (first by "
                f"{self._elements[name].describe()}); give the {kind} another name."
            )
        return f"{kind} {name!r}"

    def _canon(self, node: Any) -> Any:
        return self.ground if node == "0" else node

    def _node(self, owner: str, node: Any, what: str) -> str:
        if not isinstance(node, str) or not node:
            raise ModelError(
                f"{owner} {what} must be a node name (a non-empty string), got {node!r}."
            )
        return self._canon(node)

    def _two_nodes(self, owner: str, a: Any, b: Any, what: str = "terminal") -> tuple[str, str]:
        a, b = self._node(owner, a, what), self._node(owner, b, what)
        if a == b:
            where = "ground" if a == self.ground else f"node {a!r}"
            raise ModelError(
                f"{owner} has both {what}s on {where}, so it does nothing; "
                "connect one of them to another node."
            )
        return a, b

    def _terminals(self, owner: str, terminals: Any, order: tuple[str, ...] | None):
        if isinstance(terminals, Mapping) and order is None:
            order = tuple(terminals)
        if not isinstance(terminals, Mapping) or order is None or len(order) < 2:
            raise ModelError(
                f"{owner} needs terminals as a dict terminal -> node with at least "
                f"two entries, got {terminals!r}."
            )
        missing = [t for t in order if terminals.get(t) is None]
        if missing:
            raise ModelError(
                f"{owner} is missing terminal(s) {missing}; give a node name for "
                f"each of {list(order)}."
            )
        pairs = []
        for t in order:
            if not isinstance(t, str) or not t:
                raise ModelError(f"{owner} terminal names must be non-empty strings, got {t!r}.")
            pairs.append((t, self._node(owner, terminals[t], f"terminal {t!r}")))
        if len({node for _, node in pairs}) == 1:
            raise ModelError(
                f"{owner} has all its terminals on node {pairs[0][1]!r}, so it "
                "does nothing; connect them to different nodes."
            )
        return tuple(pairs)

    def _linear_two_node(self, cls, name, a, b, what: str, value, unit: str, *,
                         allow_input: bool = True) -> str:
        """Shared body of the linear two-terminal element methods."""
        owner = self._start(cls.kind, name)
        a, b = self._two_nodes(owner, a, b)
        with self._transaction():
            ref = self._value(owner, what, value, name, unit, allow_input=allow_input)
            return self._add(cls(name, a, b, ref))

    def _value(
        self,
        owner: str,
        what: str,
        value: Any,
        new_name: str,
        unit: str,
        *,
        allow_input: bool = True,
    ) -> Ref:
        return self._values.resolve(
            value, owner=owner, what=what, new_name=new_name, unit=unit, allow_input=allow_input
        )

    def _device_params(
        self,
        owner: str,
        name: str,
        params: Mapping[str, Any] | None,
        units: Mapping[str, str] | None,
    ) -> dict[str, Ref]:
        if params is None:
            return {}
        if not isinstance(params, Mapping):
            raise ModelError(f"{owner} params must be a dict name -> value, got {params!r}.")
        units = dict(units or {})
        pmap = {}
        # Names first, so a misspelt name fails before any parameter is created.
        ordered = sorted(params.items(), key=lambda kv: not isinstance(kv[1], str))
        for local, value in ordered:
            if not isinstance(local, str) or not local:
                raise ModelError(
                    f"{owner} parameter names must be non-empty strings, got {local!r}."
                )
            unit = units.get(local, LAW_UNITS.get(local, ""))
            pmap[local] = self._value(
                owner, f"parameter {local!r}", value, f"{name}.{local}", unit, allow_input=False
            )
        return {local: pmap[local] for local in params}

    @contextlib.contextmanager
    def _transaction(self):
        """Undo parameters created by an element call that then fails."""
        saved = (dict(self._values.params), dict(self._values.units))
        try:
            yield
        except BaseException:
            self._values.params, self._values.units = saved
            raise

    def _add(self, element: AbstractElement) -> str:
        for node in element.nodes():
            if node != self.ground:
                self._nodes.setdefault(node, None)
        self._elements[element.name] = element
        self._version += 1
        return element.name


def _check_laws(owner: str, first, second, what=("current", "charge")) -> None:
    if first is None and second is None:
        raise ModelError(f"{owner} needs a {what[0]}= or {what[1]}= law (or both).")
    for label, fn in zip(what, (first, second), strict=True):
        if fn is not None and not callable(fn):
            raise ModelError(f"{owner} {label}= must be a function, got {fn!r}.")
