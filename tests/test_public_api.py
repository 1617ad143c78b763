"""The public surface is curated: a sorted __all__ that this test pins."""

import subprocess
import sys

import lagsight


def test_all_is_sorted_and_importable():
    assert lagsight.__all__ == sorted(lagsight.__all__)
    for name in lagsight.__all__:
        assert hasattr(lagsight, name), name


def test_stats_layer_imports_no_ipython_or_plotting():
    code = (
        "import sys, lagsight.stats, lagsight.diagnosis; "
        "bad = [m for m in ('IPython', 'ipywidgets', 'matplotlib') if m in sys.modules]; "
        "print(','.join(bad))"
    )
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True)
    assert out.stdout.strip() == ""


# the data arguments a function may take positionally with a default (everything else with a
# default is an option, and options are keyword-only)
_OPTIONAL_DATA = {"durbin_watson": {"exog"}}
_NOT_RESULTS = {"load_ipython_extension", "unload_ipython_extension"}


def _public_functions():
    import inspect

    return {
        name: obj
        for name, obj in vars(lagsight).items()
        if name in lagsight.__all__ and inspect.isfunction(obj) and name not in _NOT_RESULTS
    }


def test_options_are_keyword_only_and_the_data_comes_first():
    import inspect

    for name, fn in _public_functions().items():
        params = list(inspect.signature(fn).parameters.values())
        assert params and params[0].kind is inspect.Parameter.POSITIONAL_OR_KEYWORD, name
        assert params[0].default is inspect.Parameter.empty, name  # the data, required
        for p in params:
            if p.kind is inspect.Parameter.POSITIONAL_OR_KEYWORD and p.default is not inspect.Parameter.empty:
                assert p.name in _OPTIONAL_DATA.get(name, ()), f"{name}({p.name}=...) should be keyword-only"


def test_one_name_per_idea():
    """The lag idea has two names (one lag, the highest lag), the sample size one, k' and rank."""
    import inspect

    banned = {
        "order_by",
        "nlags",
        "maxlags",
        "lags",
        "bg_order",
        "seasonal_period",
        "nobs",
        "k",
        "intercept",
        "regressors",
        "X",
        "y",
        "h",
        "hac_rule",
        "rule",
    }
    for name, fn in _public_functions().items():
        used = set(inspect.signature(fn).parameters) & banned
        assert not used, f"{name} uses {used}"
    for cls in (
        lagsight.BoundsResult,
        lagsight.DurbinWatsonResult,
        lagsight.NeweyWestResult,
        lagsight.FGLSResult,
        lagsight.BreuschGodfreyResult,
        lagsight.DurbinHResult,
        lagsight.LagPairs,
        lagsight.PowerCurve,
    ):
        import dataclasses

        assert not {f.name for f in dataclasses.fields(cls)} & banned, cls.__name__


def test_every_public_function_returns_an_exported_frozen_object():
    import dataclasses
    import typing

    for name, fn in _public_functions().items():
        hints = typing.get_type_hints(fn)
        assert "return" in hints, f"{name} has no return annotation"
        ret = hints["return"]
        assert ret in vars(lagsight).values() or ret is float, f"{name} returns {ret}, which is not exported"
        if dataclasses.is_dataclass(ret):
            assert ret.__dataclass_params__.frozen, f"{ret.__name__} is not frozen"


def test_package_is_typed():
    from importlib import resources

    assert resources.files("lagsight").joinpath("py.typed").is_file()
