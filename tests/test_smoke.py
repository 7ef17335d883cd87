from conftest import solve_verified


def test_tiny_solves_and_verifies(tiny):
    result = solve_verified(tiny)
    assert result.status.value == "optimal"
