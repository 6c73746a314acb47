"""One run: prepare the emitted deck, simulate it, read the results back, verify steady
states and diagnose thermal runaway."""
