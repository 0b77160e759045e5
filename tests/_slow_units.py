"""Slow search units for the fault tests: a kill lands while units are in flight.

:func:`slow_execute_unit` is what the driver hands a Dask worker in place of
``chirpsift.run.stages.execute_unit``; this module is pickled by value, so workers run it
without importing it from the tests folder.
"""

import time

import cloudpickle

import chirpsift.run.driver
from chirpsift.run.stages import execute_unit

DELAY = 0.25  # s per search unit: the scenario's units take about 10 ms


def slow_execute_unit(unit, analysis, upstream=None):
    if unit.stage == "search":
        time.sleep(DELAY)
    return execute_unit(unit, analysis, upstream)


def install(monkeypatch=None):
    """Make the driver submit slow units (through ``monkeypatch`` when given)."""
    import sys

    cloudpickle.register_pickle_by_value(sys.modules[__name__])
    if monkeypatch is not None:
        monkeypatch.setattr(chirpsift.run.driver, "execute_unit", slow_execute_unit)
    else:
        chirpsift.run.driver.execute_unit = slow_execute_unit
