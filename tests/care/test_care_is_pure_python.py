"""clinic.care imports neither Flask nor TinyDB nor anything of clinic.store or clinic.web."""
import pkgutil
import subprocess
import sys

import clinic.care


def test_engine_imports_no_web_or_storage():
    mods = [m.name for m in pkgutil.walk_packages(clinic.care.__path__, "clinic.care.")]
    code = ("import sys\n"
            + "".join(f"import {m}\n" for m in mods)
            + "from clinic.care import plan_pregnancy, load_profile\n"
            + "bad = [m for m in sys.modules if m.split('.')[0] in ('flask', 'tinydb', 'werkzeug')"
              " or m.startswith(('clinic.store', 'clinic.web', 'clinic.card', 'clinic.reports'))]\n"
            + "print(','.join(bad))\n")
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True)
    assert out.stdout.strip() == ""

