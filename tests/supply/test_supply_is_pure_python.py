"""clinic.supply imports neither Flask nor TinyDB nor the store, web, card, signing or reports packages."""
import pkgutil
import subprocess
import sys

import clinic.supply


def test_supply_imports_no_web_or_storage():
    mods = [f"clinic.supply.{m.name}" for m in pkgutil.iter_modules(clinic.supply.__path__)]
    assert {"clinic.supply.forecast", "clinic.supply.poisson", "clinic.supply.stock_plan",
            "clinic.supply.transfers"} <= set(mods)
    code = ("import sys\n" + "".join(f"import {m}\n" for m in mods)
            + "bad = [m for m in sys.modules if m.split('.')[0] in ('flask', 'tinydb', 'werkzeug', 'scipy', 'numpy')"
              " or m.startswith(('clinic.store', 'clinic.web', 'clinic.card', 'clinic.reports', 'clinic.signing'))]\n"
            + "print(','.join(bad))\n")
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True)
    assert out.stdout.strip() == ""
