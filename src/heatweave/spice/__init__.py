"""The deck: lossless reader and tree, the ngspice grammar and typed syntax, includes and
subcircuit hierarchy, element terminals, and lint of a plain deck."""
