"""lumped: multi-body lumped-parameter mechanical systems.

Load a system file, assemble its matrices, find its static equilibrium, modes and
step limits::

    import lumped
    system = lumped.load("demo_systems/quarter_car.toml")
    matrices = lumped.assemble(system)
    static = lumped.static_equilibrium(matrices)

All values are SI (kg, m, s, N); units appear only in files and on screens.
"""

import os as _os

# The engine is single-threaded by design (compiled chunks, one core per run or
# worker); multi-threaded BLAS on small vectors only contends with it, and on a
# loaded two-core machine a 100 000-element dot product took 300 times longer with
# two BLAS threads than with one. Takes effect when lumped is imported before numpy;
# set the variable yourself to choose otherwise.
for _name in ("OPENBLAS_NUM_THREADS", "OMP_NUM_THREADS", "MKL_NUM_THREADS"):
    _os.environ.setdefault(_name, "1")

from lumped.assemble import Matrices, NonlinearElements, StateSpace, assemble, state_space
from lumped.demos import DEMO_DIR, demo_path, demo_systems
from lumped.errors import LumpedError, ModelError, Problem
from lumped.files import dump_path, dumps, load, loads, save
from lumped.frequency import FrequencyResponse, frequency_response, transfer, transmissibility
from lumped.metrics import Figure, road_figures, run_figures
from lumped.model import (
    Body,
    BumpInput,
    Damper,
    Force,
    HarmonicInput,
    Inerter,
    RoadInput,
    RunSettings,
    Spring,
    StepInput,
    Support,
    SweepInput,
    System,
    TableInput,
    check_system,
    uniform_chain,
)
from lumped.report import SystemSummary, node_levels, summarize
from lumped.static import StaticError, StaticState, static_equilibrium
from lumped.steppers import STEPPERS, Stepper, get_stepper
from lumped.units import display, parse_quantity
from lumped.variants import VariantRuns, simulate_variants, variant_system

__all__ = [
    "Body", "BumpInput", "DEMO_DIR", "Damper", "Figure", "Force", "FrequencyResponse",
    "HarmonicInput", "Inerter",
    "LumpedError", "Matrices", "ModelError", "NonlinearElements", "Problem", "RoadInput",
    "RunSettings", "STEPPERS", "Spring", "StateSpace", "StaticError", "StaticState",
    "StepInput", "Stepper", "Support", "SweepInput", "System", "SystemSummary", "TableInput",
    "assemble", "check_system", "frequency_response", "road_figures", "run_figures",
    "transfer", "transmissibility", "demo_path", "demo_systems", "display", "dump_path", "dumps",
    "get_stepper", "load", "loads", "node_levels", "parse_quantity", "save", "state_space",
    "simulate_variants", "static_equilibrium", "summarize", "uniform_chain", "variant_system",
    "VariantRuns",
]  # fmt: skip
__version__ = "0.1.0"
