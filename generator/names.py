"""Name hygiene: which spec names may become C and Python identifiers, and how comments are escaped.

Every name taken from a spec (algebra, type, kernel, basis and blade names) ends up as an
identifier in emitted C and Python.  Only plain ASCII identifiers are accepted, never a word
reserved in C, C++ or Python, and never one that the emitters use themselves.
"""
from __future__ import annotations

import keyword
import re

IDENT = re.compile(r"[A-Za-z_][A-Za-z0-9_]*\Z")
MAX_LEN = 63   # C99 guarantees 63 significant characters for internal identifiers

C_RESERVED = frozenset("""
auto break case char const continue default do double else enum extern float for goto if inline
int long register restrict return short signed sizeof static struct switch typedef union unsigned
void volatile while _Bool _Complex _Imaginary bool true false NULL size_t main
""".split())

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


def identifier_problem(name: object) -> str | None:
    """Why `name` cannot be an identifier in the emitted code, or None when it can."""
    if not isinstance(name, str):
        return f"expected a string, got {type(name).__name__}"
    if not name:
        return "an empty name"
    if not name.isascii():
        return f"{name!r} contains non-ASCII characters; use ASCII letters, digits and '_'"
    if not IDENT.match(name):
        return (f"{name!r} is not an identifier: use letters, digits and '_', "
                "not starting with a digit")
    if name.startswith("__") or name.startswith("_"):
        return f"{name!r} starts with '_', which C reserves for the implementation"
    if name in RESERVED:
        return f"{name!r} is a reserved word in C, C++ or Python"
    if len(name) > MAX_LEN:
        return f"{name!r} is longer than {MAX_LEN} characters"
    return None


def comment_text(text: str) -> str:
    """Text safe inside a C block comment and a Python comment: one line, printable ASCII."""
    clean = "".join(ch if " " <= ch <= "~" else "?" for ch in str(text))
    return clean.replace("*/", "* /").replace("/*", "/ *").replace("\\", "/")
