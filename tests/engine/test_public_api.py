"""The public surface of ``import reduction`` is pinned: adding is deliberate, removing breaks users."""
import reduction


def test_all_names_resolve_and_are_sorted():
    for name in reduction.__all__:
        assert hasattr(reduction, name), name
    assert reduction.__all__ == sorted(reduction.__all__, key=lambda s: (s.lower(), s))


def test_surface_contains_each_reduction_step():
    expected = {
        "cycle_stats", "bias_correct", "strip_beams", "isotope_dilution", "calibrate_spike", "blank_correct",
        "standard_factor", "propagate_linear", "monte_carlo", "reduce_spiked_analysis", "york_fit",
        "fit_isochron", "weighted_mean", "isochron_age", "two_point_age", "epsilon", "model_age",
        "reference_set", "get_system",
    }
    assert expected <= set(reduction.__all__)


def test_version_matches_pyproject():
    import pathlib
    import re
    text = (pathlib.Path(__file__).parents[2] / "pyproject.toml").read_text()
    assert re.search(r'^version = "([^"]+)"', text, re.M).group(1) == reduction.__version__
