"""Kernels as native functions: compiled once by numba, loaded later without it.

A kernel is a numba-compilable Python function over C-contiguous arrays and scalars.
The first time a process needs it and no compiled copy is cached, numba compiles it
behind a C-callable wrapper (``numba.cfunc``: every array passed as a pointer and its
shape), and llvmlite, numba's own LLVM binding, turns the optimised LLVM module numba
produced (``inspect_llvm()``) into an object file for this processor. The object file is
kept in the per-user cache folder (:func:`piezo._kernels.cache.cache_folder`); every
later process loads it with llvmlite's MCJIT engine (about 0.03 s of CPU, numba not
imported) where loading numba's own cache took about 0.25 s (importing numba, then
numba building its registries and runtime before it would hand out cached code).

The code that runs is the same in both cases: the object file just compiled, or read
back, is loaded by llvmlite and called through :mod:`ctypes` (which releases the
interpreter lock for the call, so kernels run in parallel threads). The cache key
covers everything the machine code depends on: this module and the kernels' source
files, the kernel's argument layout and compiler options, numba's and llvmlite's
versions, the processor (name and features as LLVM sees them) and the Python version.
A file whose key or checksum does not match is compiled again and replaced
atomically; when the folder cannot be written, every process compiles (1-3 s). The
folder is trusted as numba's own cache would be (its files are machine code this
process runs): it is the user's own cache folder, or the one ``PIEZO_CACHE_DIR`` names.

The kernels never raise (their arguments are checked in Python first, see
:class:`Kernel`), so numba's exception machinery in the wrapper is dead code; the
runtime functions it would call (``numba_*``, ``NRT_*``: numba's helper library, not
loaded here) are replaced by stubs that report the fault on stderr and abort.

Examples
--------
>>> import numpy as np
>>> def scaled_sum(x, k):
...     total = 0.0
...     for i in range(x.shape[0]):
...         total += k * x[i]
...     return total
>>> def count_positive(x, out):
...     n = 0
...     for i in range(x.shape[0]):
...         if x[i] > 0.0:
...             out[n] = x[i]
...             n += 1
...     return n, x.shape[0] - n
>>> kernel = Kernel(count_positive, (Array("f8", 1), Array("f8", 1, written=True)),
...                 returns=2)
>>> out = np.zeros(3)
>>> kernel(np.array([1.0, -2.0, 3.0]), out), out.tolist()
((2, 1), [1.0, 3.0, 0.0])
"""

from __future__ import annotations

import contextlib
import ctypes
import hashlib
import importlib.util
import os
import re
import sys
import threading
from collections.abc import Callable, Iterator, Sequence
from dataclasses import dataclass
from functools import cache
from pathlib import Path
from typing import Any

import numpy as np

from piezo._kernels.cache import cache_folder, code_digest, first_call, import_numba
from piezo.errors import OutputError
from piezo.io.atomic import write_bytes_atomic

__all__ = ["Array", "Kernel", "Scalar"]

#: First line of a cached object file; bump when the file layout changes.
_MAGIC = b"piezo-kernel 1\n"

_DTYPES = {"f8": "float64", "i8": "int64"}


@dataclass(frozen=True)
class Array:
    """An array argument: C-contiguous, of ``dtype`` ("f8" or "i8") and ``ndim`` axes.

    ``written``: the kernel writes into it (it must be writeable).
    """

    dtype: str
    ndim: int
    written: bool = False


@dataclass(frozen=True)
class Scalar:
    """A scalar argument, "f8" (passed as a C double) or "i8" (a 64-bit integer)."""

    dtype: str


Arg = Array | Scalar


def wrapper_source(name: str, args: Sequence[Arg], returns: int) -> str:
    """Python source of the C-callable wrapper ``name`` around the kernel ``k``.

    Every array becomes a pointer followed by one integer per axis; ``returns`` integer
    results are stored through a last pointer argument. The wrapper returns 0.

    Examples
    --------
    >>> print(wrapper_source("w", (Array("f8", 2), Scalar("f8")), 1), end="")
    def w(p0, n0_0, n0_1, s1, result):
        a0 = carray(p0, (n0_0, n0_1))
        r = k(a0, s1)
        out = carray(result, (1,))
        out[0] = r
        return 0
    """
    params: list[str] = []
    body: list[str] = []
    call: list[str] = []
    for i, arg in enumerate(args):
        if isinstance(arg, Array):
            dims = [f"n{i}_{d}" for d in range(arg.ndim)]
            params += [f"p{i}", *dims]
            shape = ", ".join(dims) + ("," if arg.ndim == 1 else "")
            body.append(f"    a{i} = carray(p{i}, ({shape}))")
            call.append(f"a{i}")
        else:
            params.append(f"s{i}")
            call.append(f"s{i}")
    if returns:
        params.append("result")
    lines = [f"def {name}({', '.join(params)}):", *body]
    if returns:
        lines.append(f"    r = k({', '.join(call)})")
        lines.append(f"    out = carray(result, ({returns},))")
        if returns == 1:
            lines.append("    out[0] = r")
        else:
            lines += [f"    out[{j}] = r[{j}]" for j in range(returns)]
    else:
        lines.append(f"    k({', '.join(call)})")
    lines.append("    return 0")
    return "\n".join(lines) + "\n"


# --- LLVM: one target machine, one engine per loaded kernel ---------------------------
_LLVM_LOCK = threading.RLock()
_llvm_ready = False


def _llvm() -> Any:
    """``llvmlite.binding``, with the native target initialised (once per process)."""
    global _llvm_ready
    import llvmlite.binding as llvm

    with _LLVM_LOCK:
        if not _llvm_ready:
            llvm.initialize_native_target()
            llvm.initialize_native_asmprinter()
            _llvm_ready = True
    return llvm


@cache
def _host() -> tuple[str, str]:
    """Processor name and features, as numba compiles for them (its overrides honoured)."""
    llvm = _llvm()
    name = os.environ.get("NUMBA_CPU_NAME") or llvm.get_host_cpu_name()
    features = os.environ.get("NUMBA_CPU_FEATURES")
    if features is None:
        features = "" if "NUMBA_CPU_NAME" in os.environ else llvm.get_host_cpu_features().flatten()
    return name, features


def _target_machine() -> Any:
    llvm = _llvm()
    name, features = _host()
    target = llvm.Target.from_default_triple()
    return target.create_target_machine(
        cpu=name, features=features, opt=3, codemodel="jitdefault", jit=True
    )


_RUNTIME_DECLARATION = re.compile(r"declare (\S+) @((?:numba_|NRT_)\w+)\(([^)]*)\)")


def stub_runtime(ir: str) -> str:
    """``ir`` with numba's runtime functions defined as stubs that report and abort.

    They sit on the wrapper's exception path, which the kernels never take (see the
    module's text); defining them keeps the object file free of references to numba's
    helper library.
    """
    message = b"piezo: a compiled kernel reached numba's error path; please report this\n"
    text = "".join(f"\\{b:02X}" for b in message)
    lines: list[str] = []
    for line in ir.splitlines():
        match = _RUNTIME_DECLARATION.match(line)
        if match is None:
            lines.append(line)
            continue
        ret, name, arg_types = match.groups()
        params = ", ".join(
            f"{a.strip()} %a{i}" for i, a in enumerate(arg_types.split(",")) if a.strip()
        )
        lines += [
            f"define internal {ret} @{name}({params}) noreturn {{",
            "  call void @piezo_kernel_fault()",
            "  unreachable",
            "}",
        ]
    report: list[str] = []
    if os.name == "posix":  # write(2) to stderr; elsewhere only the C library's abort()
        report = [
            f'@piezo_fault_text = private constant [{len(message)} x i8] c"{text}"',
            "declare i64 @write(i32, ptr, i64)",
        ]
    lines += [
        *report,
        "declare void @abort() noreturn",
        "define internal void @piezo_kernel_fault() noreturn cold {",
        *(
            [f"  %n = call i64 @write(i32 2, ptr @piezo_fault_text, i64 {len(message)})"]
            if report
            else []
        ),
        "  call void @abort()",
        "  unreachable",
        "}",
    ]
    return "\n".join(lines) + "\n"


def _load_object(symbol: str, obj: bytes) -> tuple[Any, int]:
    """(engine, address of ``symbol``): the object file loaded by llvmlite's MCJIT."""
    llvm = _llvm()
    engine = llvm.create_mcjit_compiler(llvm.parse_assembly(""), _target_machine())
    engine.add_object_file(llvm.ObjectFileRef.from_data(obj))
    engine.finalize_object()
    address = engine.get_function_address(symbol)
    if not address:
        raise RuntimeError(f"symbol {symbol} not in the compiled kernel")
    return engine, address


# --- cache files ----------------------------------------------------------------------
def _pack(symbol: str, key: str, obj: bytes) -> bytes:
    digest = hashlib.sha256(obj).hexdigest()
    return b"".join(
        [_MAGIC, key.encode(), b"\n", symbol.encode(), b"\n", digest.encode(), b"\n", obj]
    )


def _unpack(data: bytes, key: str) -> tuple[str, bytes] | None:
    """(symbol, object) of a cache file written for ``key``; None if it is not one."""
    if not data.startswith(_MAGIC):
        return None
    parts = data[len(_MAGIC) :].split(b"\n", 3)
    if len(parts) != 4 or parts[0] != key.encode():
        return None
    symbol, digest, obj = parts[1].decode(errors="replace"), parts[2], parts[3]
    if hashlib.sha256(obj).hexdigest().encode() != digest:
        return None
    return symbol, obj


@contextlib.contextmanager
def _slp_vectoriser(on: bool) -> Iterator[None]:
    """numba leaves LLVM's SLP vectoriser off; ``on`` switches it on for one compilation."""
    if not on:
        yield
        return
    config: Any = import_numba().core.config  # settings are plain module attributes
    previous = config.SLP_VECTORIZE
    config.SLP_VECTORIZE = 1
    try:
        yield
    finally:
        config.SLP_VECTORIZE = previous


def _canonical(value: Any) -> str:
    """``repr`` that is the same in every process (sets, e.g. ``fastmath``, sorted)."""
    if isinstance(value, set | frozenset):
        return repr(sorted(value, key=repr))
    return repr(value)


@cache
def _numba_version_file() -> str:
    """numba's ``_version.py``, found without importing numba (its version is in it)."""
    spec = importlib.util.find_spec("numba")
    if spec is None or not spec.submodule_search_locations:
        return ""
    path = Path(next(iter(spec.submodule_search_locations))) / "_version.py"
    return code_digest(str(path)) if path.is_file() else ""


class Kernel:
    """A kernel called from Python; compiled, or loaded from the cache, on first use.

    Parameters
    ----------
    func
        The kernel's Python source function (numba nopython code, no exceptions).
    args
        One :class:`Array` or :class:`Scalar` per argument of ``func``.
    returns
        How many integers ``func`` returns: 0 (None), 1 (an int) or more (a tuple).
    check
        Called with the arguments before every call; raises ValueError when they do not
        fit together (shapes, ...). Array types and layouts are checked here.
    prepare
        Called once before compiling (compiles the helpers the kernel calls), or None.
    sources
        Files whose contents the compiled code depends on besides ``func``'s module.
    slp
        Compile with LLVM's SLP vectoriser on.
    **options
        For numba (``fastmath``, ``error_model``, ...).

    Examples
    --------
    >>> import numpy as np
    >>> from piezo._kernels.filters import sosfilt_inplace
    >>> isinstance(sosfilt_inplace, Kernel), sosfilt_inplace.__name__
    (True, 'sosfilt_inplace')
    >>> x = np.ones((3, 1))  # y[n] = x[n] + 0.5 y[n-1]
    >>> sosfilt_inplace(np.array([[1.0, 0, 0, 1, -0.5, 0]]), x, np.zeros((1, 2, 1)))
    >>> x[:, 0].tolist()
    [1.0, 1.5, 1.75]
    """

    def __init__(
        self,
        func: Callable[..., Any],
        args: Sequence[Arg],
        *,
        returns: int = 0,
        check: Callable[..., None] | None = None,
        prepare: Callable[[], None] | None = None,
        sources: Sequence[str | os.PathLike[str]] = (),
        slp: bool = False,
        **options: Any,
    ) -> None:
        self.py_func = func
        self.__name__ = func.__name__
        self.__doc__ = func.__doc__
        self.args = tuple(args)
        self.returns = int(returns)
        self._check = check
        self._prepare = prepare
        module = sys.modules.get(func.__module__)
        module_file = getattr(module, "__file__", None)
        self._sources = tuple(
            str(s) for s in (__file__, *([module_file] if module_file else []), *sources)
        )
        self._slp = slp
        self._options = options
        #: Per argument: (dtype, axes, written); axes -1 and dtype float/int for scalars.
        self._plan = tuple(
            (np.dtype(_DTYPES[a.dtype]), a.ndim, a.written)
            if isinstance(a, Array)
            else (float if a.dtype == "f8" else int, -1, False)
            for a in self.args
        )
        self._wrapper = wrapper_source(f"{func.__name__}_c", self.args, self.returns)
        self._function: Any = None
        self._engine: Any = None  # keeps the loaded machine code alive
        self._lock = threading.Lock()
        #: How the machine code was obtained: None (not yet), "cache", "compiled", or
        #: "numba" (llvmlite could not load the object file: numba's JIT runs it).
        self.origin: str | None = None

    # ------------------------------------------------------------------ compilation
    def cache_key(self) -> str:
        """Everything the compiled code depends on, as one string (see the module)."""
        name, features = _host()
        import llvmlite

        llvm = _llvm()
        parts = [
            _MAGIC.decode().strip(),
            self._wrapper,
            repr(self.args),
            repr(sorted((k, _canonical(v)) for k, v in self._options.items())),
            f"slp={self._slp}",
            *(code_digest(s) for s in self._sources),
            _numba_version_file(),
            f"llvmlite {llvmlite.__version__} llvm {llvm.llvm_version_info}",
            f"python {sys.version_info[:2]}",
            name,
            features,
        ]
        return hashlib.sha256("\n".join(parts).encode()).hexdigest()

    def cache_path(self, key: str | None = None) -> Path:
        """The cache file of this kernel (it may not exist); ``key``: its cache key, when
        known already."""
        return cache_folder() / f"{self.__name__}-{(key or self.cache_key())[:24]}.o"

    def compile(self) -> tuple[str, bytes]:
        """Compile with numba; (symbol, object file for this processor)."""
        symbol, ir = self.native_ir()
        module = _llvm().parse_assembly(ir)
        module.verify()
        return symbol, _target_machine().emit_object(module)

    def native_ir(self) -> tuple[str, str]:
        """Compile with numba; (symbol, optimised LLVM module with the runtime stubbed)."""
        wrapper = self._numba_wrapper()
        return wrapper.native_name, stub_runtime(wrapper.inspect_llvm())

    def _numba_wrapper(self) -> Any:
        """The kernel compiled by numba behind its C-callable wrapper (a numba ``cfunc``)."""
        numba = import_numba()
        if self._prepare is not None:
            self._prepare()
        with _slp_vectoriser(self._slp):
            jitted = numba.njit(**self._options)(self.py_func)
            namespace: dict[str, Any] = {"carray": numba.carray, "k": jitted}
            exec(self._wrapper, namespace)  # source generated by wrapper_source
            t = numba.types
            c_types: list[Any] = []
            for arg in self.args:
                scalar = getattr(t, _DTYPES[arg.dtype])
                if isinstance(arg, Array):
                    c_types += [t.CPointer(scalar)] + [t.int64] * arg.ndim
                else:
                    c_types.append(scalar)
            if self.returns:
                c_types.append(t.CPointer(t.int64))
            signature = t.int64(*c_types)
            return numba.cfunc(signature, **self._options)(namespace[f"{self.__name__}_c"])

    def _load(self) -> Any:
        with self._lock:
            if self._function is not None:
                return self._function
            key = self.cache_key()
            path = self.cache_path(key)
            found = None
            with contextlib.suppress(OSError):
                found = _unpack(path.read_bytes(), key)
            origin = "cache"
            if found is None:
                found = first_call(self.compile)
                origin = "compiled"
                with contextlib.suppress(OSError, OutputError):  # not kept: compiled again
                    path.parent.mkdir(parents=True, exist_ok=True)
                    write_bytes_atomic(path, _pack(found[0], key, found[1]))
            try:
                engine, address = _load_object(*found)
            except RuntimeError:
                # An llvmlite that cannot load the object here: run numba's own copy.
                engine = first_call(self._numba_wrapper)
                address = engine.address
                origin = "numba"
            c_args: list[Any] = []
            for arg in self.args:
                if isinstance(arg, Array):
                    c_args += [ctypes.c_void_p] + [ctypes.c_int64] * arg.ndim
                else:
                    c_args.append(ctypes.c_double if arg.dtype == "f8" else ctypes.c_int64)
            if self.returns:
                c_args.append(ctypes.c_void_p)
            self._engine = engine
            self._function = ctypes.CFUNCTYPE(ctypes.c_int64, *c_args)(address)
            self.origin = origin
            return self._function

    # ------------------------------------------------------------------ identity
    def __copy__(self) -> Kernel:
        return self  # one per process: copies of objects holding it share it

    def __deepcopy__(self, memo: dict[int, Any]) -> Kernel:
        return self

    def __reduce__(self) -> tuple[Any, tuple[str, str]]:
        # Pickled by name: the receiving process finds its own (module-level) kernel.
        return (_module_kernel, (self.py_func.__module__, self.__name__))

    # ------------------------------------------------------------------ calling
    def __call__(self, *values: Any) -> Any:
        function = self._function if self._function is not None else self._load()
        if len(values) != len(self._plan):
            raise TypeError(
                f"{self.__name__} takes {len(self._plan)} arguments, got {len(values)}"
            )
        c_values: list[Any] = []
        add = c_values.append
        for i, (dtype, ndim, written) in enumerate(self._plan):
            value = values[i]
            if ndim < 0:  # a scalar: dtype is float or int
                add(dtype(value))  # type: ignore[operator]
                continue
            if not (
                type(value) is np.ndarray
                and value.dtype is dtype
                and value.ndim == ndim
                and value.flags.c_contiguous
            ):
                raise TypeError(
                    f"{self.__name__}: argument {i} must be a C-contiguous "
                    f"{dtype} array of {ndim} axes"
                )
            if not value.flags.writeable:
                if written:
                    raise ValueError(f"{self.__name__}: argument {i} must be writeable")
                add(value.ctypes.data)
            elif value.size:
                # The buffer's address without numpy's ctypes helper (a third of its time).
                add(ctypes.addressof(ctypes.c_char.from_buffer(value)))  # type: ignore[arg-type]
            else:
                add(value.ctypes.data)
            c_values += value.shape
        if self._check is not None:  # shapes and values, once the types are known
            self._check(*values)
        if not self.returns:
            function(*c_values)
            return None
        result = (ctypes.c_int64 * self.returns)()
        add(result)
        function(*c_values)
        if self.returns == 1:
            return result[0]
        return tuple(result)


def _module_kernel(module: str, name: str) -> Kernel:
    """The kernel ``name`` of ``module`` (how a pickled :class:`Kernel` is restored)."""
    kernel = getattr(importlib.import_module(module), name)
    if not isinstance(kernel, Kernel):
        raise TypeError(f"{module}.{name} is not a kernel")
    return kernel
