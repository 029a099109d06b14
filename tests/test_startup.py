"""Start-up stays light: ``import timescale`` and ``timescale methods`` do not import xarray,
matplotlib, scipy.signal or scipy.optimize (each costs a large share of a second; they load
when a function needs them). Checked on the modules a fresh interpreter holds, not on time."""

import json
import subprocess
import sys

HEAVY = ("xarray", "matplotlib", "scipy.signal", "scipy.optimize", "scipy.stats", "scipy.interpolate")

PROBE = """
import io, json, sys, contextlib
{body}
print(json.dumps(sorted(m for m in sys.modules if m.startswith({heavy!r}))))
"""


def _loaded(body):
    code = PROBE.format(body=body, heavy=HEAVY)
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True)
    return json.loads(out.stdout.strip().splitlines()[-1])


def test_import_timescale_is_light():
    assert _loaded("import timescale") == []


def test_listing_methods_is_light():
    body = ("from timescale.interface import cli\n"
            "with contextlib.redirect_stdout(io.StringIO()):\n"
            "    assert cli.main(['methods']) == 0")
    assert _loaded(body) == []
