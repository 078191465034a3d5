"""The demo audio: short original pieces synthesized by showkit's own code."""
