"""The propagation engine: FFT backends, split-operator schemes, observables, the sampler and the run loop."""
