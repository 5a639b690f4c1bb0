"""Input-arrival cases: when each input of a stage reaches its evaluation value.

Two cases, named in the JSON report (``simulation[].case``):

``"rising"``
    Every input is at its precharge level (low; high for a p-type stage)
    during precharge and changes to the pattern's value at the start of
    evaluation: inputs driven by other dynamic stages.  Rising inputs lift
    the dynamic node through their gate-channel capacitance.
``"settled"``
    Inputs that may settle early have their evaluation value during
    precharge already (inputs from static logic, possible on a footed
    stage, whose footer is off during precharge); those of devices touching
    the dynamic node still change at the start of evaluation (otherwise
    precharge would charge the internal nodes too), and so do the inputs
    listed in the constraints' ``low_in_precharge``.  A footless stage has
    only the rising case.

Levels are logical (0 or 1 = VDD).
"""

from __future__ import annotations

from analyze.search.constraints import Constraints
from analyze.stages.stage import Stage
from extract.circuit import Circuit

__all__ = ["CASES", "arrival_cases", "input_levels", "late_inputs", "top_inputs", "low_in_precharge"]

CASES = ("rising", "settled")


def top_inputs(circuit: Circuit, stage: Stage) -> set[str]:
    """Gate nets of the evaluation devices with a channel terminal on the
    dynamic node (they must be off during precharge)."""
    out = set()
    for name in stage.evaluation:
        d = circuit.device(name)
        if stage.dynamic_node in (d.drain, d.source):
            out.add(d.gate)
    return out & set(stage.inputs)


def low_in_precharge(stage: Stage, constraints: Constraints | None) -> set[str]:
    """The stage inputs the constraints list in ``low_in_precharge``
    (names matched exactly or, failing that, without case)."""
    if constraints is None:
        return set()
    by_case = {n.upper(): n for n in stage.inputs}
    out = set()
    for n in constraints.low_in_precharge:
        if n in stage.inputs:
            out.add(n)
        elif n.upper() in by_case:
            out.add(by_case[n.upper()])
    return out


def arrival_cases(circuit: Circuit, stage: Stage, constraints: Constraints | None) -> tuple[str, ...]:
    """The cases the constraints allow for ``stage``.

    Examples
    --------
    >>> from extract.circuit import Device
    >>> c = Circuit("c", {}, [Device("MA", "nmos", "X", "A", "n1", 1, .15),
    ...                      Device("MB", "nmos", "n1", "B", "f", 1, .15)])
    >>> s = Stage("X", "n", "CLK", "VDD", "VSS", ("MP",), ("MA", "MB"), "MF", "f", ("A", "B"), ("n1",))
    >>> arrival_cases(c, s, None)
    ('rising', 'settled')
    >>> s.footer = None
    >>> arrival_cases(c, s, None)
    ('rising',)
    """
    if not stage.footed:
        return ("rising",)
    early = set(stage.inputs) - top_inputs(circuit, stage) - low_in_precharge(stage, constraints)
    return CASES if early else ("rising",)


def late_inputs(circuit: Circuit, stage: Stage, constraints: Constraints | None, case: str) -> set[str]:
    """The inputs that change at the start of evaluation in ``case``: every
    one when rising; when settled, the top inputs and those low in
    precharge.

    >>> from extract.circuit import Device
    >>> c = Circuit("c", {}, [Device("MA", "nmos", "X", "A", "n1", 1, .15),
    ...                      Device("MB", "nmos", "n1", "B", "f", 1, .15)])
    >>> s = Stage("X", "n", "CLK", "VDD", "VSS", ("MP",), ("MA", "MB"), "MF", "f", ("A", "B"), ("n1",))
    >>> sorted(late_inputs(c, s, None, "rising")), sorted(late_inputs(c, s, None, "settled"))
    (['A', 'B'], ['A'])
    """
    if case == "rising":
        return set(stage.inputs)
    return top_inputs(circuit, stage) | low_in_precharge(stage, constraints)


def input_levels(circuit: Circuit, stage: Stage, pattern: dict[str, int], case: str,
                 constraints: Constraints | None) -> dict[str, tuple[int, int]]:
    """Each input's logical level during precharge and during evaluation.

    Parameters
    ----------
    pattern : dict of str to int
        The evaluation values.
    case : str
        ``"rising"`` or ``"settled"``.

    Returns
    -------
    dict of str to (int, int)
        ``(precharge level, evaluation level)``.
    """
    off = 0 if stage.polarity == "n" else 1
    late = top_inputs(circuit, stage) | low_in_precharge(stage, constraints)
    out = {}
    for net in stage.inputs:
        value = int(pattern.get(net, off))
        early = case == "settled" and stage.footed and net not in late
        out[net] = (value if early else off, value)
    return out
