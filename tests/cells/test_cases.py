"""Every shared case through the cell adapter, without LibreOffice, against the engine called directly."""
import cells
import pytest
from cases import CASES, as_delivered, check


@pytest.mark.parametrize("case", CASES, ids=[c.id for c in CASES])
def test_case(case):
    got = getattr(cells, case.method)(*as_delivered(case.method, case.args))
    problem = check(case, got)
    assert problem is None, problem


def test_every_table_function_has_a_case():
    import functions
    covered = {c.method for c in CASES}
    missing = [f.display for f in functions.FUNCTIONS if f.method not in covered]
    assert not missing, f"no case for {missing}"
