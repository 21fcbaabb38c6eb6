"""Name hygiene: which spec names may become C and Python identifiers, and how comments are escaped.

Every name taken from a spec (algebra, type, kernel, basis and blade names) ends up as an
identifier in emitted C and Python.  Only plain ASCII identifiers are accepted, never a word
reserved in C, C++ or Python, and never one that the emitters use themselves.  The names the
targets derive by prefixing (`NAME_<type>`, `NAME_<kernel>_n`, `<kernel>_batch`, ...) are checked
as a set per target, so two spec entries can never become the same emitted name.  Values echoed
in messages go through `shown`, which escapes control characters and shortens long values.
"""
from __future__ import annotations

import builtins
import keyword
import re
import reprlib
import sys

IDENT = re.compile(r"[A-Za-z_][A-Za-z0-9_]*\Z")
MAX_LEN = 63   # C99 guarantees 63 significant characters for internal identifiers

C_RESERVED = frozenset("""
auto break case char const continue default do double else enum extern float for goto if inline
int long register restrict return short signed sizeof static struct switch typedef union unsigned
void volatile while _Bool _Complex _Imaginary bool true false NULL size_t main
alignas alignof constexpr nullptr static_assert thread_local typeof typeof_unqual
errno stdin stdout stderr complex imaginary I noreturn math_errhandling
""".split())   # C99 and C23 keywords, and lower-case object-like macros of the standard headers

CPP_RESERVED = frozenset("""
alignas alignof and and_eq asm bitand bitor catch char8_t char16_t char32_t class compl concept
consteval constexpr constinit const_cast co_await co_return co_yield decltype delete dynamic_cast
explicit export friend mutable namespace new noexcept not not_eq nullptr operator or or_eq private
protected public reinterpret_cast requires static_assert static_cast template this thread_local
throw try typeid typename using virtual wchar_t xor xor_eq std
""".split())

PY_RESERVED = frozenset(keyword.kwlist) | frozenset(keyword.softkwlist) | frozenset(
    "None True False self cls np numba njit math out".split())

# names the emitted code itself uses for arguments, loop counters and helpers
EMITTER_RESERVED = frozenset("a b i n r t s_ out result".split())

RESERVED = C_RESERVED | CPP_RESERVED | PY_RESERVED

# a kernel is a module-level Python function: it must not shadow a builtin the code may call
PY_BUILTINS = frozenset(n for n in dir(builtins) if not n.startswith("_")) | frozenset(
    "exit quit help copyright credits license".split())     # the same with or without `site`
# module-level tables of every emitted Python module
PY_GLOBALS = ("TYPES", "KERNELS")
# what NAME.h declares for itself after the prefix (emit/c.py): macros, typedef, math helpers
C_OWN = {"H": "the include guard", "REAL": "the scalar type macro", "real": "the scalar typedef",
         "RESTRICT": "the restrict macro"} | {f: f"the math helper {f}" for f in (
             "sqrt", "cos", "sin", "cosh", "sinh", "abs", "atan2", "exp_c", "exp_s", "exp_d")}
# NAME.py must not shadow a module that code next to it imports
PY_MODULES = frozenset(sys.stdlib_module_names) | frozenset("numpy numba sympy scipy".split())

_SHOWN = reprlib.Repr()
_SHOWN.maxstring, _SHOWN.maxother, _SHOWN.maxlist, _SHOWN.maxlevel = 60, 60, 6, 3


def shown(value: object) -> str:
    """A short repr of a spec value for a message: escaped, at most about 60 characters."""
    return _SHOWN.repr(value)


def printable(text: str) -> str:
    """A message with every control or invisible character escaped (`\\n`, `\\u202e`)."""
    return "".join(ch if ch.isprintable() else ascii(ch)[1:-1] for ch in text)


def identifier_problem(name: object) -> str | None:
    """Why `name` cannot be an identifier in the emitted code, or None when it can."""
    if not isinstance(name, str):
        return f"expected a string, got {type(name).__name__}"
    if not name:
        return "an empty name"
    if not name.isascii():
        bad = next(ch for ch in name if not ch.isascii())
        return (f"{shown(name)} contains the non-ASCII character {bad!r} (U+{ord(bad):04X}); "
                "use ASCII letters, digits and '_'")
    if len(name) > MAX_LEN:
        return f"{shown(name)} is longer than {MAX_LEN} characters"
    if not IDENT.match(name):
        return (f"{shown(name)} is not an identifier: use letters, digits and '_', "
                "not starting with a digit")
    if name.startswith("_"):
        return f"{name!r} starts with '_', which C reserves for the implementation"
    if name in RESERVED:
        return f"{name!r} is a reserved word in C, C++ or Python"
    return None


def module_problem(name: str) -> str | None:
    """Why the algebra name cannot name the emitted Python module `NAME.py`, or None."""
    if name in PY_MODULES:
        return (f"{name!r} is the name of a Python module ({name}.py next to your code would "
                "shadow it); choose another algebra name")
    return None


def c_problem(ident: str) -> str | None:
    if len(ident) > MAX_LEN:
        return f"which is longer than the {MAX_LEN} characters C guarantees to distinguish"
    if ident in C_RESERVED or ident in CPP_RESERVED:
        return "which is reserved in C or C++"
    if ident.endswith("_t"):
        return "and POSIX reserves names ending in '_t'"
    return None


def python_problem(ident: str) -> str | None:
    if ident in PY_BUILTINS:
        return "which would shadow the Python builtin of that name"
    return None


def c_names(algebra: str, types: dict, kernels: dict, fixed=()) -> list[tuple[str, str, str]]:
    """(identifier, key, what) for every global C name the header declares; `types`/`kernels`
    map name -> key, `fixed` names the kernels (sandwiches) that also get a `_fixed_n` loop."""
    rows = [(f"{algebra}_{name}", "algebra.name", what) for name, what in C_OWN.items()]
    rows += [(f"{algebra}_{t}", key, f"type {t!r}") for t, key in types.items()]
    for k, key in kernels.items():
        rows += [(f"{algebra}_{k}", key, f"kernel {k!r}"),
                 (f"{algebra}_{k}_n", key, f"the array form of kernel {k!r}")]
        if k in fixed:
            rows.append((f"{algebra}_{k}_fixed_n", key, f"the one-versor loop of kernel {k!r}"))
    return rows


def python_names(kernels: dict) -> list[tuple[str, str, str]]:
    """(identifier, key, what) for every module-level Python name of NAME.py and NAME_numba.py."""
    rows = [(g, "", f"the module table {g}") for g in PY_GLOBALS]
    for k, key in kernels.items():
        rows += [(k, key, f"kernel {k!r}"), (f"{k}_batch", key, f"the batch form of kernel {k!r}")]
    return rows


def clash(target: str, rows, problem) -> tuple[str, str] | None:
    """(key, message) for the first emitted name that is invalid or that two entries share."""
    seen: dict[str, str] = {}
    for ident, key, what in rows:
        why = problem(ident)
        if why and key:
            return key, f"{what} becomes the {target} name {ident!r}, {why}; rename it"
        if ident in seen:
            return key, (f"{what} and {seen[ident]} both become the {target} name {ident!r}; "
                         "rename one of them")
        seen[ident] = what
    return None


def comment_text(text: str) -> str:
    """Text safe in a C block comment, a Python comment or docstring: one line, printable ASCII."""
    clean = "".join(ch if " " <= ch <= "~" else "?" for ch in str(text))
    return clean.replace("*/", "* /").replace("/*", "/ *").replace("\\", "/").replace('"', "'")
