"""Reference models: float CFAR golden models, threshold design, bit-accurate pipeline."""
