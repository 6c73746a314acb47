"""The caution every report carries: one text, shared by the README, JSON and table footer.

heatweave's temperatures come from a model the user wrote; a designer who reads them as
measurements can be hurt.  The same words appear everywhere so none is weaker than another.
"""

from __future__ import annotations

#: One line, printed under every summary table.
CAUTION_LINE = (
    "caution: these temperatures are model estimates. Hot parts can burn people and start "
    "fires; the manufacturer's ratings, measurements on the real assembly, local codes and "
    "licensed practice decide."
)

#: The paragraph for the README and the ``cautions`` key of the JSON report.
CAUTION_TEXT = (
    "heatweave estimates temperatures from the thermal model written in the annotation file; "
    "the results are only as good as its thermal resistances, capacities and temperature "
    "coefficients, and they ignore everything the model leaves out (airflow, neighbouring "
    "parts, solder joints, ageing). Hot parts can burn people and start fires. The "
    "manufacturer's ratings, measurements on the real assembly, local codes and licensed "
    "practice decide whether a design is safe; a margin printed here is not a qualification."
)
