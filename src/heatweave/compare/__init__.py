"""``heatweave compare``: what a change did to a board's temperatures, drift and margins.

Both sides of a comparison are read from the JSON results the other commands write
(:mod:`heatweave.compare.snapshot`), so a key's meaning is the one its writer documents and
a change there flows through.  :mod:`heatweave.compare.diff` pairs the parts and limits of
the two sides and holds the changes to the gate's thresholds; :mod:`heatweave.compare.
revision` takes a deck as it was at a git revision; :mod:`heatweave.compare.render` writes
the table, Markdown, JSON and JUnit forms.
"""
