"""The estimation core: orientations, search neighbourhoods, kriging kernels and the chunked engine that runs them on any backend."""
