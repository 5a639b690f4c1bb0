"""Progress display (analyze.cli.progress): drawn on a terminal only.

Source: the module's contract, observed here — a stream that says it is a
terminal receives the step names and counts; any other stream receives
nothing, and the check's own outputs are unchanged.
"""

import io
import os

from analyze.cli.progress import Steps
from analyze.search.analysis import analyse_circuit
from extract.layout.pipeline import extract_layout
from extract.techfile import load_tech

ROOT = os.path.join(os.path.dirname(__file__), "..", "..", "..")
GDS = os.path.join(ROOT, "sample_layouts", "dsk18_cells.gds")
TECH = os.path.join(ROOT, "sample_layouts", "dsk18.toml")


class Terminal(io.StringIO):
    def isatty(self):
        return True


def test_steps_drawn_on_a_terminal_only():
    tech = load_tech(TECH)
    circuit = extract_layout(GDS, tech, "DOMINO_OR16")
    plain = analyse_circuit(circuit, tech)[1]
    for stream, drawn in ((Terminal(), True), (io.StringIO(), False)):
        with Steps(stream=stream) as steps:
            with steps.step("extracting DOMINO_OR16"):
                pass
            ticks = []

            def counted(n):
                ticks.append(n)
                return steps.counted("analysing stages", n)

            _, results = analyse_circuit(circuit, tech, progress=counted)
        assert ticks == [len(plain)] and len(plain) >= 1
        assert [r.margin_v for r in results] == [r.margin_v for r in plain]
        text = stream.getvalue()
        assert ("analysing stages" in text) == drawn
        assert ("extracting DOMINO_OR16" in text) == drawn
