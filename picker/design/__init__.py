"""The design core: stage requirement -> minimum specifications -> checks -> ranking.

- requirement: the stage as the user states it (options or a TOML design file);
- (the stages and their circuits live in picker.stages; the solver and the op-amp's
  exact closed-loop gain in picker.circuit)
- spec: the minimum specifications and how the gain-error budget is split;
- checks, limits, accuracy: every part checked, vectorised over the parts table;
- rank, misses: ranking, rejections explained, nearest misses.
"""

from picker.design.rank import Selection, select
from picker.design.requirement import Requirement, load_design, requirement_from
from picker.design.spec import Spec, minimum_specs

__all__ = ["Requirement", "Selection", "Spec", "load_design", "minimum_specs",
           "requirement_from", "select"]
