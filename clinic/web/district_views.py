"""Blueprint placeholder (to be filled in by its owner)."""
from flask import Blueprint

bp = Blueprint("district", __name__)
