"""heatweave: self-heating for plain SPICE decks.

The subpackages are the pipeline, in the order data flows (a stage imports only earlier
ones): ``spice`` (lossless reader, deck tree, includes, lint) -> ``tempmodels`` (R as a
function of T) -> ``networks`` (Foster and Cauer thermal ladders) -> ``annotation`` (the
TOML file beside the deck) -> ``thermal`` (the thermal circuit, heat balance) -> ``emit``
(the electrothermal deck) -> ``simulators`` (ngspice back ends) -> ``run`` -> ``cosim`` ->
``settle`` -> ``checks`` -> ``reports`` -> ``sweep`` -> ``compare`` -> ``cli``.
"""

__version__ = "0.1.0"
