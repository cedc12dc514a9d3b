"""Shared test fixtures."""

import pytest

# A tiny atlas for the query and CLI tests: every integer n to 40, eight log-spaced n to 5000,
# seven p, all methods. About 1.5 s to build, once per test session.
SMALL_N_SPEC = "1:40,log:50:5000:8"
SMALL_P_SPEC = "0.01,0.05,0.1,0.3,0.5,0.7,0.9"


@pytest.fixture(scope="session")
def small_atlas(tmp_path_factory):
    """The tiny atlas: ``{"dataset": Dataset, "float64": path, "float32": path}``.

    ``float32`` is the compact copy (:func:`atlas.cube.compact`), as the embedded atlas is stored.
    """
    import atlas
    from atlas import cube

    ds = atlas.build_atlas(n=SMALL_N_SPEC, p=SMALL_P_SPEC, progress=False)
    folder = tmp_path_factory.mktemp("small_atlas")
    return {
        "dataset": ds,
        "float64": atlas.save_atlas(ds, folder / "small64.nc"),
        "float32": atlas.save_atlas(cube.compact(ds, "float32"), folder / "small32.nc"),
    }


# A tiny atlas for the chart, sheet and rule tests: a logit p axis (both tails), the round p of
# the tables, n from 1 to 10^5, three methods. About 0.5 s to build, once per test session.
CHART_N_SPEC = "1:30,log:40:100000:14"
CHART_P_SPEC = "logit:0.001:0.999:13,0.01,0.05,0.1,0.3,0.5"
CHART_METHODS = ("normal_cc", "edgeworth_cc", "poisson")


@pytest.fixture(scope="session")
def chart_atlas(tmp_path_factory):
    """The chart atlas, opened: an :class:`atlas.Atlas` whose ``path`` is a float64 file."""
    import atlas

    ds = atlas.build_atlas(n=CHART_N_SPEC, p=CHART_P_SPEC, methods=CHART_METHODS, progress=False)
    path = atlas.save_atlas(ds, tmp_path_factory.mktemp("chart_atlas") / "chart.nc")
    return atlas.open_atlas(path)
