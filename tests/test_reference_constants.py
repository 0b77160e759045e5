"""Constants of the reference and the compiled package against their
definitions (REFERENCES item 14)."""

import math

import pytest


def test_constants_from_definitions(impl):
    c = 299792458.0                              # exact, SI
    assert impl.C_SI == c
    # IAU 2015 Resolution B3: (GM)_sun^N = 1.3271244e20 m^3 s^-2 exactly;
    # T_sun = GM/c^3 = 4.925490947641267e-6 s (the quoted 16 digits are 1 ulp
    # from the double nearest to GM/c^3, hence rel 1e-15)
    assert impl.T_SUN == pytest.approx(1.3271244e20 / c**3, rel=1e-15)
    assert impl.T_SUN == pytest.approx(4.925490947641267e-6, rel=1e-15)
    # IAU 2012 B2 au, IAU 2015 B2 parsec = (648000/pi) au
    assert impl.MPC == pytest.approx(648000.0 / math.pi * 149597870700.0 * 1e6, rel=1e-15)
    assert impl.MPC == pytest.approx(3.0856775814913673e22, rel=1e-15)


def test_reference_is_self_contained():
    """The reference imports as a package of its own (numpy only)."""
    import importlib
    import sys
    ref = importlib.import_module("chirpsift.reference")
    for name in ("welch", "design_psd", "psd_to_grid", "truncate_inverse_psd", "whiten",
                 "taylorf2", "chirp_duration", "isco_frequency", "sigma", "snr_series",
                 "correlate", "taylorf2_phase", "time_to_coalescence", "median_bias"):
        assert callable(getattr(ref, name))
    mod_files = [m.__name__ for m in sys.modules.values()
                 if getattr(m, "__name__", "").startswith("chirpsift.reference")]
    assert mod_files
    import ast
    import pathlib
    for path in pathlib.Path(ref.__file__).parent.glob("*.py"):
        tree = ast.parse(path.read_text())
        for node in ast.walk(tree):
            if isinstance(node, ast.Import):
                assert all(a.name.split(".")[0] == "numpy" for a in node.names), path
            elif isinstance(node, ast.ImportFrom):
                assert node.level >= 1 or (node.module or "").split(".")[0] == "numpy", path
