"""Versors and the projective toolkit (issue 4), checked against outside sources.

Sources: scipy.spatial.transform.Rotation (Rodrigues' rotation formula); 4x4 homogeneous matrices
of rigid motions (standard graphics texts: points map by H, planes by H^-T); Plücker coordinates
of a line through two points (Plücker, 1865; common practice in graphics); numpy.linalg.solve for
the intersection point of three planes.
"""
from __future__ import annotations

import ast
from pathlib import Path

import numpy as np
import pytest
from scipy.spatial.transform import Rotation

from generator import derive, model, pipeline, spec as spec_mod
from generator.optimize import count, expanded, optimize

from helpers import ROOT, as_dict, build_python, from_dict, kernel, write_spec

ARM = ROOT / "specs" / "arm.toml"
DRONE = ROOT / "specs" / "drone.toml"


@pytest.fixture(scope="module")
def arm(tmp_path_factory):
    return build_python(ARM, tmp_path_factory.mktemp("arm"))


@pytest.fixture(scope="module")
def drone(tmp_path_factory):
    return build_python(DRONE, tmp_path_factory.mktemp("drone"))


# --- rotors against scipy -----------------------------------------------------------------

def rotor_for(drone, rotvec):
    """exp(-theta/2 * B) with B the unit plane of the axis n (B = n1 e23 - n2 e13 + n3 e12)."""
    module, e = drone
    half = -0.5 * np.asarray(rotvec)
    rate = from_dict(module, "rate", {"e23": half[0], "e13": -half[1], "e12": half[2]})
    return e.rotor_from_rate(rate)


def test_rotor_sandwich_matches_scipy_rotation(drone):
    # scipy's Rotation.from_rotvec(theta n).apply(v) is Rodrigues' formula
    module, e = drone
    r = np.random.default_rng(11)
    for rotvec, v in zip(r.normal(size=(40, 3)), r.normal(size=(40, 3))):
        R = rotor_for(drone, rotvec)
        got = e.rotate(R, from_dict(module, "vec", {"e1": v[0], "e2": v[1], "e3": v[2]}))
        expected = Rotation.from_rotvec(rotvec).apply(v)
        assert np.allclose(got, expected, atol=1e-12)


def test_rotation_matrix_matches_scipy(drone):
    module, e = drone
    rotvec = np.array([0.3, -1.1, 0.7])
    M = np.array(e.rotation_matrix(rotor_for(drone, rotvec))).reshape(3, 3)
    assert np.allclose(M, Rotation.from_rotvec(rotvec).as_matrix(), atol=1e-12)


def test_rotor_exp_near_zero_angle_is_smooth(drone):
    # exp(B) -> 1 + B as B -> 0 (series; no division by zero)
    module, e = drone
    for tiny in (0.0, 1e-300, 1e-12, 1e-6, 1e-3):
        R = e.rotor_from_rate(from_dict(module, "rate", {"e12": tiny}))
        assert np.allclose(R, [np.cos(tiny), np.sin(tiny), 0, 0], rtol=1e-15, atol=1e-300)


# --- the projective algebra against homogeneous matrices ------------------------------------

def plane(module, a, b, c, d):
    """The plane a x + b y + c z + d = 0 as a e1 + b e2 + c e3 + d e0 (convention of the
    projective model, from memory)."""
    return from_dict(module, "plane", {"e1": a, "e2": b, "e3": c, "e0": d})


def point(arm, x):
    """A Euclidean point as the meet of the planes x = x0, y = y0, z = z0."""
    module, e = arm
    xy = e.meet_planes(plane(module, 1, 0, 0, -x[0]), plane(module, 0, 1, 0, -x[1]))
    return e.meet_line_plane(xy, plane(module, 0, 0, 1, -x[2]))


def euclid(module, p):
    d = as_dict(module, "point", p)
    return np.array([d["e032"], d["e013"], d["e021"]]) / d["e123"]


def motor(arm, rotvec, t):
    """Translate by t after rotating by rotvec: exp(-t/2 . (e01, e02, e03)) exp(-theta/2 B)."""
    module, e = arm
    half = -0.5 * np.asarray(rotvec)
    rot = e.motor_from_line(from_dict(module, "line", {"e23": half[0], "e31": half[1], "e12": half[2]}))
    tr = e.motor_from_line(from_dict(module, "line", {"e01": -t[0] / 2, "e02": -t[1] / 2, "e03": -t[2] / 2}))
    return e.compose(tr, rot)


def homogeneous(rotvec, t):
    H = np.eye(4)
    H[:3, :3] = Rotation.from_rotvec(rotvec).as_matrix()
    H[:3, 3] = t
    return H


def test_point_from_planes_is_their_intersection(arm):
    # the intersection of three planes solves the linear system (numpy.linalg.solve)
    module, e = arm
    r = np.random.default_rng(5)
    for _ in range(20):
        planes = r.normal(size=(3, 4))
        pl = [plane(module, *p) for p in planes]
        p = e.meet_line_plane(e.meet_planes(pl[0], pl[1]), pl[2])
        expected = np.linalg.solve(planes[:, :3], -planes[:, 3])
        assert np.allclose(euclid(module, p), expected, atol=1e-9)


def test_motor_on_points_matches_homogeneous_matrix(arm):
    module, e = arm
    r = np.random.default_rng(6)
    for _ in range(30):
        rotvec, t, x = r.normal(size=3), r.normal(size=3), r.normal(size=3)
        moved = e.move_point(motor(arm, rotvec, t), point(arm, x))
        expected = homogeneous(rotvec, t) @ np.append(x, 1.0)
        assert np.allclose(euclid(module, moved), expected[:3], atol=1e-12)


def test_motor_on_planes_matches_inverse_transpose(arm):
    # planes transform by H^-T (standard graphics texts)
    module, e = arm
    r = np.random.default_rng(7)
    for _ in range(20):
        rotvec, t, pl = r.normal(size=3), r.normal(size=3), r.normal(size=4)
        got = as_dict(module, "plane", e.move_plane(motor(arm, rotvec, t), plane(module, *pl)))
        got = np.array([got["e1"], got["e2"], got["e3"], got["e0"]])
        expected = np.linalg.inv(homogeneous(rotvec, t)).T @ pl
        assert np.allclose(got, expected, atol=1e-12)


def test_sandwich_matrix_is_the_homogeneous_matrix(arm):
    # layout: rows and columns follow the point type (e021, e013, e032, e123) = (z, y, x, w);
    # the matrix of an unnormalized motor V is |V|^2 H
    module, e = arm
    rotvec, t = np.array([0.4, 0.2, -0.9]), np.array([1.5, -2.0, 0.25])
    V = np.array(motor(arm, rotvec, t)) * 1.7
    M = np.array(e.motor_matrix(V)).reshape(4, 4)
    order = [2, 1, 0, 3]                      # x, y, z, w from (e021, e013, e032, e123)
    scale = 1.7 ** 2
    assert np.allclose(M[np.ix_(order, order)] / scale, homogeneous(rotvec, t), atol=1e-12)


def test_composition_is_matrix_product(arm):
    module, e = arm
    r = np.random.default_rng(8)
    a, b = [(r.normal(size=3), r.normal(size=3)) for _ in range(2)]
    ab = e.compose(motor(arm, *a), motor(arm, *b))
    x = r.normal(size=3)
    expected = homogeneous(*a) @ homogeneous(*b) @ np.append(x, 1.0)
    assert np.allclose(euclid(module, e.move_point(ab, point(arm, x))), expected[:3], atol=1e-12)


def test_motor_inverse_undoes_the_motion(arm):
    module, e = arm
    r = np.random.default_rng(9)
    V = np.array(motor(arm, r.normal(size=3), r.normal(size=3))) * 0.6
    one = e.compose(V, e.invert_motor(V))
    assert np.allclose(one, [1, 0, 0, 0, 0, 0, 0, 0], atol=1e-12)


# --- join and meet against Plücker coordinates -----------------------------------------------

def test_join_of_points_gives_pluecker_coordinates(arm):
    # line through p and q: direction q - p, moment p x q (Plücker, 1865); in this algebra the
    # line is m1 e01 + m2 e02 + m3 e03 + d1 e23 + d2 e31 + d3 e12 (projective model, from memory)
    module, e = arm
    r = np.random.default_rng(10)
    for p, q in zip(r.normal(size=(20, 3)), r.normal(size=(20, 3))):
        L = as_dict(module, "line", e.join(point(arm, p), point(arm, q)))
        assert np.allclose([L["e23"], L["e31"], L["e12"]], q - p, atol=1e-12)
        assert np.allclose([L["e01"], L["e02"], L["e03"]], np.cross(p, q), atol=1e-12)


def test_pseudoscalar_regressive_is_identity(tmp_path):
    # I v X = X (DESIGN section 3), for every grade, in a degenerate metric
    path = write_spec(tmp_path, """
        [algebra]
        name = "pga"
        basis = ["e0", "e1", "e2", "e3"]
        metric = [0, 1, 1, 1]
        [types.pseudo]
        grades = [4]
        [types.full]
        grades = [0, 1, 2, 3, 4]
        [[kernels]]
        op = "regressive"
        args = ["pseudo", "full"]
        name = "ivx"
        result = "full"
        [targets.python]
    """)
    module, e = build_python(path, tmp_path / "out")
    x = np.random.default_rng(2).normal(size=16)
    assert np.allclose(e.ivx([1.0], x), x)


# --- operation counts -------------------------------------------------------------------------

def emitted_counts(source: str, name: str) -> tuple[int, int]:
    """Multiplies and adds counted from the emitted Python function (negation free, *1 free)."""
    fn = next(n for n in ast.parse(source).body if isinstance(n, ast.FunctionDef) and n.name == name)
    mul = add = 0
    for node in ast.walk(fn):
        if isinstance(node, ast.BinOp):
            if isinstance(node.op, ast.Mult):
                mul += 1
            elif isinstance(node.op, (ast.Add, ast.Sub)):
                add += 1
    return mul, add


@pytest.mark.parametrize("path", [ARM, DRONE, ROOT / "specs" / "planar.toml"], ids=lambda p: p.stem)
def test_manifest_counts_match_emitted_code(path, tmp_path):
    module, _ = build_python(path, tmp_path)
    source = (tmp_path / f"{module.name}.py").read_text()
    for k in module.kernels:
        if k.program.counts.div or k.program.counts.calls:
            continue      # counted the same way, but 1/x is a Div node here
        assert emitted_counts(source, k.name) == (k.program.counts.mul, k.program.counts.add), k.name


def naive_sandwich_cost(spec_path: Path, v: str, x: str):
    """Two geometric products, V X and then (V X) ~V, each in its expanded form."""
    s = spec_mod.load(spec_path)
    m = model.build(s)
    alg = m.algebra
    vx = derive.Variables([("a", m.types[v]), ("b", m.types[x])])
    first = derive.prune(derive.bilinear(alg, derive.CATALOGUE["geometric"].keep, *vx.mvs), None)
    cost1 = sum(len(p) for p in first.values())          # one multiply per term a_i b_j
    adds1 = sum(len(p) - 1 for p in first.values())
    cost2 = len(first) * len(m.types[v].components)       # each component of V X times each of ~V
    return cost1 + 2 * cost2, adds1


@pytest.mark.parametrize("path, name, v, x", [
    (ARM, "move_point", "motor", "point"), (ARM, "move_line", "motor", "line"),
    (ARM, "move_plane", "motor", "plane"), (DRONE, "rotate", "rotor", "vec"),
])
def test_sandwich_form_choice(path, name, v, x):
    k = kernel(pipeline.derive_module(spec_mod.load(path)), name)
    forms = dict(k.program.forms)
    assert set(forms) == {"direct-cse", "matrix"}
    chosen = k.program.counts
    assert all(chosen.mul + chosen.add <= c.mul + c.add for c in forms.values())
    naive_mul, _ = naive_sandwich_cost(path, v, x)
    assert all(c.mul < naive_mul for c in forms.values())


@pytest.mark.parametrize("form", ["direct-cse", "matrix"])
def test_both_sandwich_forms_compute_the_sandwich(form, tmp_path):
    # evaluate each form's program numerically and compare with the exact formulas
    from generator.optimize import cse_form, matrix_form
    k = kernel(pipeline.derive_module(spec_mod.load(ARM)), "move_point")
    temps, outputs = (cse_form if form == "direct-cse" else matrix_form)(k)
    r = np.random.default_rng(4)
    env = {f"a_{c}": v for c, v in zip(k.arg_fields[0], r.normal(size=8))}
    env.update({f"b_{c}": v for c, v in zip(k.arg_fields[1], r.normal(size=4))})
    for t in temps:
        env[t.target] = evaluate(t.expr, env)
    for fm, out in zip(k.formulas, outputs):
        exact = sum(float(t.coef) * np.prod([env[f"{f.arg}_{f.comp}"] for f in t.factors])
                    for t in fm.terms)
        assert np.isclose(evaluate(out.expr, env), exact, atol=1e-12)


def evaluate(node, env):
    from generator.ir import Num, Prod, Sum, Var
    if isinstance(node, Var):
        return env[node.name]
    if isinstance(node, Num):
        return float(node.value)
    if isinstance(node, Prod):
        return float(np.prod([evaluate(f, env) for f in node.factors]))
    if isinstance(node, Sum):
        return sum(s * evaluate(t, env) for s, t in node.terms)
    raise TypeError(node)
