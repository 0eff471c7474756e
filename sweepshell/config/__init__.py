"""Configuration: the only layer that touches hydra."""
