"""clinic.printing stands alone: it imports nothing else of clinic, and WeasyPrint only to print."""
from __future__ import annotations

import json
import os
import subprocess
import sys


def test_importing_printing_loads_no_other_clinic_module_and_no_weasyprint():
    code = ("import json, sys, clinic.printing, clinic.printing.fetcher, clinic.printing.pdf; "
            "print(json.dumps(sorted(m for m in sys.modules if m == 'weasyprint' or m.startswith('clinic.'))))")
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True,
                         env=dict(os.environ), cwd=os.getcwd())
    assert json.loads(out.stdout) == ["clinic.printing", "clinic.printing.errors", "clinic.printing.fetcher",
                                      "clinic.printing.pdf"]
