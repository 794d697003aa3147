"""buildsheet: build packets for club HF wire-antenna build days."""

__version__ = "0.1.0"
