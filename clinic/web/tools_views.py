"""Calculators page: the same clinic.care functions as `rhledger calc` and /api/v1/calc."""
from __future__ import annotations

from flask import Blueprint, abort, render_template, request

from clinic.records.validate import ValidationError
from clinic.web import calcs

bp = Blueprint("tools", __name__, url_prefix="/calc")


@bp.route("/")
def calculators():
    return render_template("calculators.html", calcs=calcs.CALCULATORS, nav_active="calc")


@bp.route("/<name>")
def calculator(name):
    spec = calcs.CALCULATORS.get(name)
    if spec is None:
        abort(404, f"No calculator {name!r}; there are: {', '.join(calcs.CALCULATORS)}.")
    result, errors = None, {}
    asked = any(request.args.get(i["name"], "").strip() for i in spec["inputs"])
    if asked:
        try:
            result = calcs.run(name, request.args)
        except ValidationError as e:
            errors = e.errors
    return render_template("calculator.html", name=name, spec=spec, result=result, errors=errors,
                           args=request.args, nav_active="calc"), (422 if errors else 200)
