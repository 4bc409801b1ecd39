"""Stage 0, the configuration: one TOML file in, one frozen :class:`Config` out.

Each stage owns its settings (``audit.<stage>.settings``); this package only reads the file and
assembles them, so no stage imports ``config`` back. Every problem of the file is reported at
once, naming the file and the dotted key (docs/config.md).
"""

from audit.config.loading import Config, load_config

__all__ = ["Config", "load_config"]
