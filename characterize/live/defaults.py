"""Defaults of the live commands, importable without numpy (the command line's help)."""

#: Default sweep level, dBFS peak: low, so that a first take is never loud.
DEFAULT_LEVEL_DBFS = -30.0
#: Default ceiling for the output level, dBFS: nothing louder is ever played
#: unless --max-level is raised on purpose.
DEFAULT_MAX_LEVEL_DBFS = -12.0
