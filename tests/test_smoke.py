from conftest import solve_verified


def test_tiny_solves_and_verifies(tiny):
    result = solve_verified(tiny)
    assert result.status.value == "optimal"


def test_the_package_loads_its_names_on_first_use_and_lists_them():
    # The package's names load on first use (the command line starts before pandas, pulp
    # and highspy); a review found its submodules gone as attributes and dir() listing
    # importlib instead of the API, which notebooks complete from.
    import subprocess
    import sys

    code = ("import sys, rebalance; assert 'pulp' not in sys.modules; "
            "assert rebalance.readers.read_instance is rebalance.read_instance; "
            "assert sorted(dir(rebalance)) == sorted(rebalance.__all__); "
            "from rebalance import *; print(len(rebalance.__all__))")
    done = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True,
                          check=False)
    assert done.returncode == 0, done.stderr
