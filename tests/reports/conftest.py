"""Fixtures of the district reporting tests: the invented district of tests/reports/dataset.py."""
from __future__ import annotations

import logging

import pytest

from clinic.reports.cases import load_inputs
from clinic.reports.coverage import compute_month, compute_trend
from clinic.reports.month import Month
from tests.reports import dataset as ds

NOVEMBER = Month(2026, 11)


@pytest.fixture(scope="session")
def truth_store(tmp_path_factory):
    """Every record of both clinics in one store (no bundles involved)."""
    return ds.build_truth(tmp_path_factory.mktemp("truth") / "district")


@pytest.fixture(scope="session")
def inputs(truth_store):
    return load_inputs(truth_store, truth_store.settings, now=ds.NOW, first_month=NOVEMBER.shift(-11))


@pytest.fixture(scope="session")
def november(inputs):
    return compute_month(inputs.cases, NOVEMBER, ds.TZ, now=ds.NOW, stock_records=inputs.stock,
                         facilities=inputs.facilities, profile=inputs.profile_label)


@pytest.fixture(scope="session")
def trend(inputs, november):
    return compute_trend(inputs.cases, NOVEMBER, ds.TZ, now=ds.NOW, months=12, facilities=november.facilities)


@pytest.fixture(scope="session")
def clinic_template(tmp_path_factory):
    root = tmp_path_factory.mktemp("clinic-template") / "clinics"
    ds.Clinics(root).advance()
    return root


@pytest.fixture
def clinics(tmp_path, clinic_template):
    """The two clinics' own stores, everything entered (a fresh copy for each test)."""
    return ds.Clinics.copy_of(clinic_template, tmp_path / "clinics")


@pytest.fixture
def district_dir(tmp_path):
    d = tmp_path / "district"
    ds.write_config(d, ds.DISTRICT_ID, "Invented District", "district")
    return d


@pytest.fixture
def weasy_warnings():
    """Every WeasyPrint log record at WARNING or above (a test asserts the list stays empty)."""
    records: list[logging.LogRecord] = []

    class Catch(logging.Handler):
        def emit(self, record):
            records.append(record)

    h = Catch(level=logging.WARNING)
    loggers = [logging.getLogger(n) for n in ("weasyprint", "weasyprint.progress", "fontTools")]
    for lg in loggers:
        lg.addHandler(h)
    yield records
    for lg in loggers:
        lg.removeHandler(h)
