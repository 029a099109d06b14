"""The built-in time-scaling methods of timescale, installed as the ``timescale_builtins``
import package and registered through entry points exactly like third-party plugins."""
