"""kinetrace: daily performance check of continuous stirred-tank reactors."""

__version__ = "0.1.0"
