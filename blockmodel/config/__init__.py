"""The project file: its settings, defaults and checks."""
