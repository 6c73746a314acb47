"""The electrothermal deck: card forms per annotated resistor, stencils, header and thermal
section, written by splicing into the deck's text or from the tree."""
