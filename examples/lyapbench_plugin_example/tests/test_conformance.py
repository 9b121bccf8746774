"""The plugin's own test suite runs lyapbench's conformance kit on its learner."""

from lyapbench_plugin_example import LocalLinear
from surrogates.conformance import parametrize_with_checks


@parametrize_with_checks([LocalLinear(delays=2, n_neighbors=20)])
def test_local_linear_conforms(check):
    check()
