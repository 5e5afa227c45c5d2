"""Fixtures shared by the test folders."""

import pytest


@pytest.fixture(params=[(1e-5, 1e-5), (3e-6, 7e-6)], ids=["default", "perturbed"])
def day_tolerances(request) -> dict:
    """Solver tolerances of a simulated day (``rtol``, ``atol`` of :func:`airtaper.simulate.periodic`): the
    default pair and a perturbed one, so that a result compared across ways of reaching the repeating day
    does not hold for one set of round-off only."""
    rtol, atol = request.param
    return {"rtol": rtol, "atol": atol}
