"""The fixed-point pipeline: integer arithmetic, word formats, the structural and fast bit-accurate models,
the input quantiser and the exact false-alarm law of the quantised pipeline."""
