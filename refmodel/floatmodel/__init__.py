"""Float golden models: 1D and range-Doppler CFAR, and the edge policies they share."""
