"""Behaviour at singular inputs (issue 7, item 5), in every target, as the README documents it.

- `inverse` at zero norm: C and numba follow IEEE 754 (1/0 = inf, then inf*0 = nan), pure
  Python raises ZeroDivisionError on floats and gives inf/nan with a RuntimeWarning on numpy arrays.
- `exp` at zero returns exactly 1 + B (here 1); near zero it is the series, never 0/0.
IEEE 754 division semantics are the standard's (IEEE 754-2008, section 7.3: division by zero).
"""
from __future__ import annotations

import math
import os
import shutil

import numpy as np
import pytest

from generator import native, pipeline, spec as spec_mod

from helpers import ROOT


def have_cc() -> bool:
    return bool(shutil.which("cc") or shutil.which("gcc"))


@pytest.fixture(scope="module")
def built(tmp_path_factory):
    out = tmp_path_factory.mktemp("num")
    b = pipeline.build(ROOT / "specs" / "drone.toml", str(out))
    pipeline.write(b)
    from generator.verify import load_python
    py = load_python(out / "drone.py", "numerics")
    nb = native.load_numba(out / "drone_numba.py")
    return b.module, out, py, nb


def kernel(module, name):
    return next(k for k in module.kernels if k.name == name)


def c_lib(module, out):
    if not have_cc():
        if os.environ.get("CI"):
            pytest.fail("no C compiler in CI")
        pytest.skip("no C compiler")
    return native.compile_library(module, out)


def test_python_inverse_of_zero_raises(built):
    module, out, py, nb = built
    with pytest.raises(ZeroDivisionError):
        py.invert_rotor((0.0, 0.0, 0.0, 0.0))


def test_python_inverse_of_zero_columns_is_ieee(built):
    module, out, py, nb = built
    with pytest.warns(RuntimeWarning):
        got = np.array(py.invert_rotor(np.zeros((4, 3))))
    assert not np.isfinite(got).any()


def test_numba_inverse_of_zero_is_ieee(built):
    module, out, py, nb = built
    got = np.array(nb.invert_rotor((0.0, 0.0, 0.0, 0.0)))
    assert not np.isfinite(got).any()
    batch = nb.invert_rotor_batch(np.zeros((5, 4)))
    assert batch.shape == (5, 4) and not np.isfinite(batch).any()


def test_c_inverse_of_zero_is_ieee(built):
    module, out, py, nb = built
    got = c_lib(module, out).run(kernel(module, "invert_rotor"), [np.zeros((3, 4))])
    assert not np.isfinite(got).any()


def test_inverse_of_tiny_rotor_is_finite_and_right(built):
    # no silent garbage: 1e-150 squared is 1e-300, still a normal double
    module, out, py, nb = built
    R = (1e-150, 0.0, 0.0, 0.0)
    for fn in (py.invert_rotor, nb.invert_rotor):
        assert np.allclose(fn(R), (1e150, 0.0, 0.0, 0.0), rtol=1e-15)


@pytest.mark.parametrize("target", ["python", "numba", "c"])
def test_exp_at_zero_is_exactly_one(built, target):
    module, out, py, nb = built
    zero = np.zeros((1, 3))
    if target == "c":
        got = c_lib(module, out).run(kernel(module, "rotor_from_rate"), [zero])[0]
    else:
        got = (py if target == "python" else nb).rotor_from_rate((0.0, 0.0, 0.0))
    assert tuple(got) == (1.0, 0.0, 0.0, 0.0)


@pytest.mark.parametrize("target", ["python", "numba", "c"])
def test_exp_near_zero_is_smooth(built, target):
    # exp(t e12) = cos t + sin t e12 (Euler's formula, common practice); relative accuracy kept
    module, out, py, nb = built
    lib = c_lib(module, out) if target == "c" else None
    for t in (1e-300, 1e-160, 1e-20, 1e-8, 1e-4, 0.05, 0.1, 3.0, 100.0):
        if lib is not None:
            got = lib.run(kernel(module, "rotor_from_rate"), [np.array([[t, 0.0, 0.0]])])[0]
        else:
            got = (py if target == "python" else nb).rotor_from_rate((t, 0.0, 0.0))
        assert math.isclose(got[0], math.cos(t), rel_tol=1e-14, abs_tol=1e-15)
        assert math.isclose(got[1], math.sin(t), rel_tol=1e-14, abs_tol=0.0)
