"""heatweave: self-heating for plain SPICE decks.

The pipeline, in the order data flows: ``grammar`` (lark grammar of a card) ->
``reader`` (lossless text to deck model) -> ``deck`` (immutable node types) ->
``hierarchy`` (includes, subcircuits, instance paths) -> ``annotations`` (TOML file) ->
``tempmodels`` (R as a function of T) -> ``networks`` (Foster/Cauer thermal ladders) ->
``emitter`` (electrothermal deck) -> ``simulators`` (ngspice back ends) ->
``results`` / ``reports`` / ``checks`` -> ``cli``.
"""

__version__ = "0.1.0"
