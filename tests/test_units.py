"""Units read without pint give pint's numbers, bit for bit; pint is imported
without Dask."""

from __future__ import annotations

import random
import subprocess
import sys

import pytest
from partload import units
from partload.units import Where, parse

W = Where("model.toml", "nodes", "hp_in")


@pytest.mark.parametrize("unit", sorted(units._FAST))
def test_fast_units_equal_pint(unit):
    # pint's own conversion is the reference (the definitions it ships)
    dims, _factor, _offset = units._FAST[unit]
    si = units.DIMENSIONS[dims[0]][0].replace("^", "**")
    ureg = units._registry()
    rng = random.Random(7)
    values = [166.0, 538.0, 0.1, 8.5, 1000.0, 3.3333, 1e-3] + [rng.uniform(0.0, 2000.0)
                                                               for _ in range(200)]
    for v in values:
        expected = float(ureg.Quantity(v, unit.replace("^", "**")).to(si).magnitude)
        for dim in dims:
            assert parse(f"{v!r} {unit}", dim, W) == expected


def test_fast_unit_of_the_wrong_dimension_is_refused():
    # a pressure unit given for a temperature goes through pint's message
    with pytest.raises(Exception, match="which is a pressure"):
        parse("166 bar", "temperature", W)


def test_slow_units_still_read():
    # 14.5037738 psia = 1 bar to 7 digits (1 psi = 6894.757 Pa, NIST SP 811, from memory)
    assert parse("14.5037738 psia", "pressure", W) == pytest.approx(1e5, rel=1e-7)
    # degF: (212 - 32) * 5/9 + 273.15 (hand calculation)
    assert parse("212 degF", "temperature", W) == pytest.approx(373.15, rel=1e-12)


def test_point_command_imports_neither_pint_nor_dask():
    code = ("import sys, runpy, io, contextlib\n"
            "sys.argv = ['partload', 'point', 'cases/reheat_part_load.toml']\n"
            "out = io.StringIO()\n"
            "with contextlib.redirect_stdout(out):\n"
            "    try:\n        runpy.run_module('partload.cli', run_name='__main__')\n"
            "    except SystemExit as e:\n        assert not e.code, e.code\n"
            "print(sorted(m for m in ('pint', 'dask', 'h5py', 'matplotlib') "
            "if m in sys.modules))\n")
    from pathlib import Path
    root = Path(__file__).resolve().parent.parent
    out = subprocess.run([sys.executable, "-c", code], cwd=root, capture_output=True,
                         text=True, check=True).stdout
    assert out.strip().splitlines()[-1] == "[]"


def test_pint_is_imported_without_dask():
    code = ("import sys\nfrom partload import units\nunits._registry()\n"
            "print('pint' in sys.modules, 'dask' in sys.modules)\n"
            "import importlib.util\nprint(importlib.util.find_spec('dask') is not None)\n")
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True,
                         check=True).stdout.split()
    # Dask hidden while pint is imported, and importable again afterwards when installed
    assert out[0] == "True" and out[1] == "False"
    try:
        import importlib.util
        installed = importlib.util.find_spec("dask") is not None
    except ValueError:
        installed = False
    assert out[2] == str(installed)
