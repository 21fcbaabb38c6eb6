"""Cost bound: estimate the derivation work of a spec from its declared types, before deriving.

Derivation time follows the number of terms it accumulates, and that follows the declared types
(DESIGN section 2: |A|·|B| blade pairs for a bilinear product, never 2^n).  `estimate` counts, for
each kernel, one term per blade pair whose grades the operation's grade rule can keep (a small
fraction of one for a pair it drops, which still costs a product lookup).  A non-orthogonal metric
multiplies that: each blade expands into the diagonal frame and every product blade maps back
through minors, within each block of basis vectors that the metric couples (`Shape`).  Operations
of other kinds are rows of `KINDS`; an operation without a row gets a conservative bound from its
type sizes.  `check_types` and `check_kernels` refuse a spec above the budget with the estimate
and advice on pruning, so a build never runs for an hour without saying why.

Calibration (development machine, `pipeline.derive_module`; one geometric product of two full
multivectors, diagonal metric): n = 6: 4,096 terms in 0.05 s; n = 7: 16,384 in 0.22 s; n = 8:
65,536 in 1.2 s; n = 9: 262,144 in 5.1 s; n = 10: 1,048,576 in 20.5 s, about 20 µs a term.  A whole
`bladesmith build` with all three targets takes 7 s for n = 9 and 28 s (and 1 GB) for n = 10.  Other
shapes measured against the estimate (dense and conformal metrics, scalar, outer, dual, sandwich)
ran at 4-32 µs per estimated term; 20,000 tiny kernels took 12 s (0.6 ms each, hence `KERNEL`).
The default budget, 1,000,000 terms, is about half a minute of build here, so a build that would
take over a minute on a machine half as fast is refused.
"""
from __future__ import annotations

from collections import Counter
from contextvars import ContextVar
from math import ceil, comb, prod

from .algebra import Algebra, popcount
from .model import Model
from .ops import CATALOGUE, Operation
from .spec import Spec

DEFAULT_MAX_TERMS = 1_000_000
DROPPED_PAIR = 0.2       # a blade pair the grade rule drops: a product lookup, no polynomial work
FRAME_PRODUCT = 0.02     # one blade product inside the diagonal frame of a non-orthogonal metric
MINOR = 0.02             # one step of a minor (determinant) of a blade's change of basis
SANDWICH = 8             # a cubic sandwich polynomial costs the optimizer this much more per term
KERNEL = 30              # each kernel's own overhead (optimize, print, three templates, manifest)
MAX_GROUP_PAIRS = 100_000   # beyond this many (grade, block signature) pairs, bound coarsely

_LIMIT: ContextVar[int] = ContextVar("bladesmith_max_terms", default=DEFAULT_MAX_TERMS)


def limit() -> int:
    """The budget in force: DEFAULT_MAX_TERMS, or what `--max-terms` set for this command."""
    return _LIMIT.get()


def set_limit(max_terms: int | None) -> None:
    """Set the budget for the rest of this command (None: back to the default)."""
    _LIMIT.set(DEFAULT_MAX_TERMS if max_terms is None else max_terms)


def _every(r: int, s: int, g: int) -> bool:
    return True


def result_grades(r: int, s: int, n: int) -> range:
    """Grades the geometric product of a grade-r and a grade-s blade can have in n dimensions."""
    return range(abs(r - s), min(r + s, 2 * n - r - s) + 1, 2)


def _blocks(metric) -> list[int]:
    """Bit masks of the groups of basis vectors the metric couples (connected, size >= 2)."""
    n, seen, blocks = len(metric), 0, []
    for start in range(n):
        if seen >> start & 1:
            continue
        mask, todo = 0, [start]
        while todo:
            i = todo.pop()
            if not mask >> i & 1:
                mask |= 1 << i
                todo += [j for j in range(n) if j != i and metric[i][j] != 0]
        seen |= mask
        if popcount(mask) > 1:
            blocks.append(mask)
    return blocks


class Shape:
    """How blades of an algebra expand: per coupled block, the binomial fan-out of a product."""

    def __init__(self, alg: Algebra):
        self.n = alg.n
        self.blocks = [] if alg.diagonal else _blocks(alg.metric)
        self.sizes = [popcount(m) for m in self.blocks]

    def group(self, bitmaps) -> Counter:
        """(grade, bits per block) -> how many of `bitmaps` have it."""
        return Counter((popcount(b), tuple(popcount(b & m) for m in self.blocks)) for b in bitmaps)

    def fan(self, sa: tuple, sb: tuple) -> int:
        """Bound on the product blades of one pair: blades of the reachable grades, per block."""
        return prod(sum(comb(c, g) for g in result_grades(a, b, c))
                    for c, a, b in zip(self.sizes, sa, sb))

    def frame(self, sa: tuple, sb: tuple) -> int:
        """Products inside the diagonal frame for one pair (0 for a diagonal metric)."""
        if not self.blocks:
            return 0
        return prod(comb(c, a) * comb(c, b) for c, a, b in zip(self.sizes, sa, sb))

    def expansion(self, bitmap: int) -> int:
        """Work to expand one blade into the frame: its minors (0 for a diagonal metric)."""
        if not self.blocks:
            return 0
        counts = [(c, popcount(bitmap & m)) for c, m in zip(self.sizes, self.blocks)]
        return prod(comb(c, k) * max(k, 1) ** 3 for c, k in counts)

    def worst(self) -> tuple[int, int]:
        """The largest fan-out and frame cost of any pair."""
        fan = prod(2 ** c for c in self.sizes)
        return fan, (prod(comb(c, c // 2) ** 2 for c in self.sizes) if self.blocks else 0)


class Estimator:
    """Term estimates for the declared types of one model."""

    def __init__(self, model: Model):
        self.shape = Shape(model.algebra)
        self.bitmaps = {name: t.bitmaps for name, t in model.types.items()}
        self.pseudoscalar = ((1 << model.algebra.n) - 1,)
        self._groups: dict = {}

    def blades(self, arg) -> tuple[int, ...]:
        """The blades of a declared type (by name) or of a tuple of bitmaps."""
        return self.bitmaps[arg] if isinstance(arg, str) else tuple(arg)

    def size(self, arg) -> int:
        return len(self.blades(arg))

    def groups(self, arg) -> Counter:
        if arg not in self._groups:
            self._groups[arg] = self.shape.group(self.blades(arg))
        return self._groups[arg]

    def expansions(self, a, b) -> float:
        """The change-of-basis work for the distinct blades of a and b (non-orthogonal metrics)."""
        if not self.shape.blocks:
            return 0.0
        distinct = set(self.blades(a)) | set(self.blades(b))
        return MINOR * sum(self.shape.expansion(x) for x in distinct)

    def bilinear(self, keep, a, b) -> float:
        """Terms of a bilinear product of types (or bitmap tuples) a and b under a grade rule."""
        return self.pairs(keep, a, b) + self.expansions(a, b)

    def pairs(self, keep, a, b) -> float:
        ga, gb = self.groups(a), self.groups(b)
        if len(ga) * len(gb) > MAX_GROUP_PAIRS:
            fan, frame = self.shape.worst()
            return self.size(a) * self.size(b) * (fan + FRAME_PRODUCT * frame)
        total = 0.0
        for (r, sa), na in ga.items():
            for (s, sb), nb in gb.items():
                kept = any(keep(r, s, g) for g in result_grades(r, s, self.shape.n))
                cost = self.shape.fan(sa, sb) if kept else DROPPED_PAIR
                total += na * nb * (cost + FRAME_PRODUCT * self.shape.frame(sa, sb))
        return total

    def geometric(self, a, b) -> float:
        return self.bilinear(_every, a, b)

    def sandwich(self, v, x) -> float:
        """v x ~v: the product v x, then once more by each component of v."""
        return self.geometric(v, x) * self.geometric(v, v) / self.size(v)


KINDS = {
    "bilinear": lambda e, op, a: e.bilinear(op.keep, a[0], a[1]),
    "commutator": lambda e, op, a: 2 * e.geometric(a[0], a[1]),
    "linear": lambda e, op, a: e.size(a[0]) + e.size(a[1]),
    "grade_sign": lambda e, op, a: e.size(a[0]),
    "complement": lambda e, op, a: e.size(a[0]),
    "uncomplement": lambda e, op, a: e.size(a[0]),
    "regressive": lambda e, op, a: e.size(a[0]) * e.size(a[1]),
    "dual": lambda e, op, a: e.geometric(a[0], e.pseudoscalar),
    "undual": lambda e, op, a: e.geometric(a[0], e.pseudoscalar),
    "sandwich": lambda e, op, a: SANDWICH * e.sandwich(a[0], a[1]),
    "sandwich_matrix": lambda e, op, a: e.sandwich(a[0], a[1]),
    "norm_squared": lambda e, op, a: e.geometric(a[0], a[0]),
    "inverse": lambda e, op, a: 2 * e.geometric(a[0], a[0]),
    "exp": lambda e, op, a: 2 * e.geometric(a[0], a[0]),
    "up": lambda e, op, a: e.geometric(a[0], a[0]),
}


def unknown_kind(e: Estimator, op: Operation, args) -> float:
    """A conservative bound for an operation without a row: a product, once more per factor."""
    first, last = args[0], args[-1]
    return e.geometric(first, last) * max(e.size(x) for x in args)


def estimate(model: Model) -> list[tuple[str, str, int]]:
    """(kernel key, kernel name, estimated terms) for every kernel of the model."""
    e = Estimator(model)
    rows = []
    for k in model.spec.kernels:
        op = CATALOGUE[k.op]
        rule = KINDS.get(op.kind, unknown_kind)
        rows.append((k.key, k.name, ceil(rule(e, op, list(k.args))) + KERNEL))
    return rows


def declared_components(spec: Spec) -> list[tuple[str, int]]:
    """(type key, component count) of each declared type, computed without building it."""
    n = len(spec.basis)
    return [(t.key, len(t.blades) if t.blades is not None else
             sum(comb(n, g) for g in set(t.grades) if 0 <= g <= n)) for t in spec.types]


def check_types(spec: Spec, max_terms: int | None = None) -> None:
    """Refuse declared types whose components alone exceed the budget (None: `limit()`)."""
    max_terms = limit() if max_terms is None else max_terms
    sizes = declared_components(spec)
    total = sum(size for _, size in sizes)
    if total > max_terms:
        key, size = max(sizes, key=lambda row: row[1])
        raise spec.error(key, f"the declared types have {total:,} components in all (this one "
                              f"{size:,}), above the budget of {max_terms:,} terms{ADVICE}")


def check_kernels(model: Model, max_terms: int | None = None) -> list[tuple[str, str, int]]:
    """The estimate per kernel; a SpecError at the costliest kernel when the total exceeds the
    budget (None: `limit()`)."""
    max_terms = limit() if max_terms is None else max_terms
    rows = estimate(model)
    total = sum(terms for _, _, terms in rows)
    if total > max_terms:
        key, name, terms = max(rows, key=lambda row: row[2])
        raise model.spec.error(key, f"deriving this spec would take about {total:,} terms, "
                                    f"above the budget of {max_terms:,}; kernel {name!r} alone "
                                    f"needs about {terms:,}{ADVICE}")
    return rows


ADVICE = (". Prune: declare types with only the grades or blades the kernel needs (a rotor is "
          "grades [0, 2], not a full multivector), split a product into kernels over "
          "smaller types, or raise the budget with --max-terms if the wait is worth it")
