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
