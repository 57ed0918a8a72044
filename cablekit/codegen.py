"""One generator: SymPy expressions -> vectorised NumPy functions, cached.

:func:`generate` prints a list of SymPy expressions (after common-subexpression elimination)
as a small Python module with an explicit argument order and a docstring listing every
argument, writes it to the cache folder and imports it with :mod:`importlib` (no ``exec``,
no change to ``sys.path`` or the working directory).  The cache key is the SHA-256 of the
expressions' ``srepr``, the argument names, the cse flag and the versions of cablekit, SymPy
and NumPy, so a changed derivation or library never reuses stale code.

The cache lives in ``$CABLEKIT_CACHE_DIR`` or ``~/.cache/cablekit/codegen``; when that is
not writable a private temporary folder is used.  :func:`clear_cache` empties both the
in-memory and the on-disk cache.

Importing a cached file runs it, so the cache is guarded: a folder that another user owns or
that group or others may write to is refused (:class:`CacheError`), and each module's SHA-256
is recorded beside it (``.sha256``) when it is written and compared before it is imported; a
file that does not match is generated again.
"""

from __future__ import annotations

import hashlib
import importlib.util
import os
import re
import tempfile
from dataclasses import dataclass
from pathlib import Path
from typing import Sequence

import numpy as np
import sympy as sp

from .cli import InputError

__all__ = ["GeneratedFunction", "generate", "clear_cache", "cache_dir", "CacheError"]


class CacheError(InputError):
    """The generated-code cache folder is not private to this user (so its code is not trusted);
    an :class:`~cablekit.cli.InputError`, so the command line exits with code 3."""

_GENERATOR_VERSION = "1"
_memory: dict[str, "GeneratedFunction"] = {}
_fallback_dir: Path | None = None


def cache_dir() -> Path:
    """The folder holding generated modules (created on first use)."""
    global _fallback_dir
    env = os.environ.get("CABLEKIT_CACHE_DIR")
    base = Path(env) if env else Path.home() / ".cache" / "cablekit" / "codegen"
    try:
        base.mkdir(mode=0o700, parents=True, exist_ok=True)
        _check_private(base)
        probe = base / ".write-probe"
        probe.write_text("")
        probe.unlink()
        return base
    except OSError:
        if _fallback_dir is None:
            _fallback_dir = Path(tempfile.mkdtemp(prefix="cablekit-codegen-"))
        return _fallback_dir


def _check_private(folder: Path) -> None:
    """Refuse a cache folder other users could put code into."""
    st = folder.stat()
    owner_ok = not hasattr(os, "getuid") or st.st_uid == os.getuid()
    if not owner_ok or st.st_mode & 0o022:
        raise CacheError(f"generated-code cache {str(folder)!r} is {'owned by another user' if not owner_ok else 'writable by others'} "
                         f"(mode {st.st_mode & 0o777:o}); code from it would run as you. Make it private "
                         f"(chmod go-w {str(folder)!r}) or set CABLEKIT_CACHE_DIR to a folder of your own")


def _digest(data: bytes) -> str:
    return hashlib.sha256(data).hexdigest()


def _verified(path: Path) -> bool:
    """The module file matches the SHA-256 recorded when it was written."""
    try:
        recorded = path.with_suffix(".sha256").read_text().strip()
        return recorded == _digest(path.read_bytes())
    except OSError:
        return False


def _write_module(path: Path, text: str) -> None:
    """Write the module and then its hash, each atomically (a killed write leaves no half file)."""
    from .design import atomic_write_bytes

    data = text.encode("utf-8")
    atomic_write_bytes(path, data)
    atomic_write_bytes(path.with_suffix(".sha256"), (_digest(data) + "\n").encode())


def clear_cache(*, disk: bool = True) -> int:
    """Forget every generated function; also delete the on-disk modules when ``disk``.

    Returns the number of files removed.
    """
    _memory.clear()
    removed = 0
    if disk:
        folder = cache_dir()
        for f in folder.glob("ck_*.py"):
            try:
                f.unlink()
                removed += 1
            except FileNotFoundError:
                pass
            f.with_suffix(".sha256").unlink(missing_ok=True)
    return removed


@dataclass(frozen=True)
class GeneratedFunction:
    """A generated NumPy function of scalar-or-array arguments.

    Calling it with arrays broadcast against each other returns one array of shape
    ``broadcast_shape + (len(outputs),)``: output ``k`` is ``result[..., k]``.
    """

    name: str
    arg_names: tuple[str, ...]
    output_names: tuple[str, ...]
    key: str
    path: Path
    raw: object  # the generated function: returns a tuple of outputs

    def __call__(self, *args):
        if len(args) != len(self.arg_names):
            raise TypeError(f"{self.name}() takes {len(self.arg_names)} arguments "
                            f"({', '.join(self.arg_names)}), got {len(args)}")
        arrays = [np.asarray(a, dtype=float) for a in args]
        outs = self.raw(*arrays)
        outs = np.broadcast_arrays(*[np.asarray(o, dtype=float) for o in outs], *arrays)
        return np.stack(outs[: len(self.output_names)], axis=-1)

    @property
    def source(self) -> str:
        return self.path.read_text()


def _printer():
    from sympy.printing.numpy import NumPyPrinter

    return NumPyPrinter({"fully_qualified_modules": True, "inline": True, "allow_unknown_functions": False})


def _key(name: str, exprs, args, cse: bool) -> str:
    from . import __version__

    h = hashlib.sha256()
    for part in (_GENERATOR_VERSION, __version__, sp.__version__, np.__version__, name, str(cse)):
        h.update(part.encode())
        h.update(b"\0")
    for a in args:
        h.update(sp.srepr(a).encode())
        h.update(b"\0")
    for e in exprs:
        h.update(sp.srepr(e).encode())
        h.update(b"\1")
    return h.hexdigest()


def _source(name: str, exprs, args: Sequence[sp.Symbol], output_names, cse: bool, doc: str) -> str:
    printer = _printer()
    argnames = [str(a) for a in args]
    for a in argnames:
        if not re.fullmatch(r"[A-Za-z_][A-Za-z0-9_]*", a):
            raise ValueError(f"argument name {a!r} is not a Python identifier")
    lines = ["# generated by cablekit.codegen; do not edit (the cache key covers the expressions)",
             "import numpy", "", "", f"def {name}({', '.join(argnames)}):"]
    arg_doc = "\n".join(f"        {k}. {a}" for k, a in enumerate(argnames))
    out_doc = "\n".join(f"        {k}. {o}" for k, o in enumerate(output_names))
    body_doc = doc.strip().replace('"""', "'''")
    lines.append(f'    """{body_doc}\n\n    Arguments, in order:\n{arg_doc}\n\n    Outputs, in order:\n{out_doc}\n    """')
    if cse:
        sub_symbols = sp.numbered_symbols("_x")
        reps, reduced = sp.cse(list(exprs), symbols=sub_symbols, optimizations="basic")
        for sym, e in reps:
            lines.append(f"    {sym} = {printer.doprint(e)}")
    else:
        reduced = list(exprs)
    lines.append("    return (")
    for e in reduced:
        lines.append(f"        {printer.doprint(e)},")
    lines.append("    )")
    return "\n".join(lines) + "\n"


def generate(name: str, exprs: Sequence[sp.Expr], args: Sequence[sp.Symbol], *,
             output_names: Sequence[str] | None = None, cse: bool = True, doc: str = "") -> GeneratedFunction:
    """Build (or fetch from cache) a NumPy function evaluating ``exprs``.

    Parameters
    ----------
    name : str
        Python name of the generated function.
    exprs : sequence of sympy.Expr
        The outputs, in order.
    args : sequence of sympy.Symbol
        The arguments, in this exact order (never a set's order).
    output_names : sequence of str, optional
        Labels of the outputs for the docstring; defaults to ``out0, out1, ...``.
    cse : bool
        Common-subexpression elimination (faster to evaluate; on by default).
    doc : str
        Summary placed in the generated docstring.
    """
    if any(isinstance(e, str) for e in exprs):
        raise TypeError(f"{name}: expressions must be SymPy objects or numbers, never text")
    exprs = [e if isinstance(e, sp.Basic) else sp.Float(e) if isinstance(e, float) else sp.Integer(e)
             for e in exprs]
    args = list(args)
    free = set().union(*[e.free_symbols for e in exprs]) if exprs else set()
    missing = free - set(args)
    if missing:
        raise ValueError(f"{name}: expressions use symbols not in the argument list: {sorted(map(str, missing))}")
    output_names = tuple(output_names or [f"out{k}" for k in range(len(exprs))])
    if len(output_names) != len(exprs):
        raise ValueError(f"{name}: {len(output_names)} output names for {len(exprs)} expressions")
    key = _key(name, exprs, args, cse)
    if key in _memory:
        return _memory[key]
    folder = cache_dir()
    path = folder / f"ck_{name}_{key[:20]}.py"
    if not _verified(path):  # missing, changed since it was written, or without its hash
        _write_module(path, _source(name, exprs, args, output_names, cse, doc or name))
    spec = importlib.util.spec_from_file_location(f"cablekit_generated_{name}_{key[:20]}", path)
    module = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(module)  # our own generated file, not user text
    fn = GeneratedFunction(name=name, arg_names=tuple(str(a) for a in args), output_names=output_names,
                           key=key, path=path, raw=getattr(module, name))
    _memory[key] = fn
    return fn
