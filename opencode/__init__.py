"""oecode (import package `opencode`): a workbench for coding open-ended survey answers."""

__version__ = "0.1.0"
