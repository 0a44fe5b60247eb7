"""Build the C library: libbusbudget.so and its header busbudget.h (cffi embedding mode).

Usage (from the repository, with the project's Python)::

    python cexport/build.py [--out DIR]        # default DIR: cexport/build/
    python -m cexport.build [--out DIR]

DIR then holds ``libbusbudget.so`` and a copy of ``busbudget.h``; the C sources
cffi generates stay in ``DIR/src/``.  Link a C program with
``cc prog.c -IDIR -LDIR -lbusbudget -Wl,-rpath,DIR``.

How the pieces fit:

- ``cexport/busbudget.h`` is the single source of the API: its declarations,
  with comments and preprocessor lines stripped, are what
  ``ffi.embedding_api()`` exports, and the generated C includes the header
  itself so the compiler checks every definition against it.
- The embedded Python runs a two-line init code that imports
  :mod:`budget.capi` from the installed package (real module files, so numba
  can cache the kernels) and binds it to the exported functions.
- The library embeds the interpreter that runs this script.  Its executable
  path is baked in and handed to Python at start-up (see ``START_PYTHON``), so
  the embedded runtime finds the same standard library and site-packages (a
  virtual environment included) whatever the host's PATH.  ``BUSBUDGET_PYTHON``
  overrides it at run time.  libpython is found through an rpath to this
  interpreter's library directory.
- cffi returns 0 from every call whose runtime failed to start; the header's
  status codes never use 0 for anything else.
"""
from __future__ import annotations

import argparse
import re
import shutil
import sys
import sysconfig
import time
from pathlib import Path

HERE = Path(__file__).resolve().parent
HEADER = HERE / "busbudget.h"
DEFAULT_OUT = HERE / "build"
MODULE = "_busbudget_embedded"      # name of the cffi module inside the library
TARGET = "libbusbudget.*"           # cffi picks the platform suffix (.so on Linux)


def api_declarations(header_text: str) -> str:
    """The header's C declarations for ``ffi.embedding_api()``.

    Drops comments, preprocessor lines and the ``extern "C"`` wrapper, which
    cffi's parser does not take; everything else is passed on unchanged.
    """
    text = re.sub(r"/\*.*?\*/", " ", header_text, flags=re.S)
    text = re.sub(r"//[^\n]*", " ", text)
    out, skip = [], 0
    for line in text.splitlines():
        s = line.strip()
        if s.startswith("#ifdef __cplusplus"):
            skip = 1
            continue
        if skip:
            if s.startswith("#endif"):
                skip = 0
            continue
        if s.startswith("#"):
            continue
        out.append(line)
    return "\n".join(out)


def constants(header_text: str) -> dict[str, int]:
    """Every ``NAME = value`` enumerator of the header (status codes, edges, bits, sizes)."""
    decl = api_declarations(header_text)
    return {m.group(1): int(m.group(2)) for m in re.finditer(r"\b(BB_[A-Z0-9_]+)\s*=\s*(-?\d+)", decl)}


def functions(header_text: str) -> list[str]:
    """Names of the functions the header declares, in order."""
    return re.findall(r"^\s*int\s+(bb_\w+)\s*\(", api_declarations(header_text), flags=re.M)


def _c_string(value: str) -> str:
    """A C string literal holding ``value``'s UTF-8 bytes (octal escapes for anything unusual)."""
    out = []
    for b in value.encode("utf-8"):
        ch = chr(b)
        out.append(ch if (ch.isalnum() or ch in "/._-+:@=, ") else f"\\{b:03o}")
    return '"' + "".join(out) + '"'


# Runs once, inside the embedded interpreter, at the first call into the library.
INIT_CODE = """\
import sys
from MODULE import ffi, lib
_problem = ffi.string(lib.bb_start_problem()).decode("utf-8", "replace")
if _problem:
    sys.stderr.write("libbusbudget: %s\\n" % _problem)
    raise RuntimeError(_problem)
try:
    import budget.capi
except BaseException as exc:
    sys.stderr.write(
        "libbusbudget: the embedded Python (%s) cannot import the busbudget package: %s: %s\\n"
        "  sys.path = %r\\n"
        "  It needs the Python environment the library was built with, or the python executable\\n"
        "  of another one holding busbudget, numpy and numba in BUSBUDGET_PYTHON.\\n"
        % (sys.executable, type(exc).__name__, exc, sys.path))
    raise
budget.capi.bind(ffi, lib)
""".replace("MODULE", MODULE)

# cffi starts the interpreter with one call, Py_InitializeEx(0), inside its generated
# code.  The build renames that call (a -D macro) to START_PYTHON below, which
#  - says which python executable the interpreter stands for (PyConfig.program_name),
#    so it finds that installation's standard library and site-packages (a virtual
#    environment's pyvenv.cfg included) instead of guessing from the host's PATH;
#  - refuses to hand CPython a setting it cannot start from (PYTHONHOME without a
#    standard library, a missing BUSBUDGET_PYTHON): CPython would exit the host
#    process.  It starts the build environment's interpreter, isolated from the
#    environment variables, and the init code then fails on purpose, so every call
#    returns 0 and stderr says why.
START_PYTHON = "busbudget_start_python_"

# C code compiled into the library besides cffi's generated wrappers.
C_SOURCE = """\
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <unistd.h>
#include "busbudget.h"

/* The python executable of the environment the library was built in. */
static const char bb_build_python[] = BUILD_PYTHON;

/* Why the runtime must not be used ("" if nothing is wrong); read by the init code. */
static char bb_problem[2048];

static const char *bb_start_problem(void) { return bb_problem; }

/* Does PYTHONHOME ("prefix" or "prefix:exec_prefix") hold this Python's standard library? */
static int bb_home_has_stdlib(const char *home)
{
    char landmark[4096];
    int n = (int)strcspn(home, ":");
    snprintf(landmark, sizeof landmark, "%.*s/lib/python%d.%d/os.py", n, home, PY_MAJOR_VERSION,
             PY_MINOR_VERSION);
    return access(landmark, R_OK) == 0;
}

void START_PYTHON(int initsigs)
{
    PyConfig config;
    PyStatus status;
    const char *exe = getenv("BUSBUDGET_PYTHON"), *home = getenv("PYTHONHOME");
    int isolated = 0;

    if (exe == NULL || exe[0] == 0) {
        exe = bb_build_python;
        if (access(exe, X_OK) != 0)
            snprintf(bb_problem, sizeof bb_problem, "the python executable the library was built "
                     "with, %s, is gone; rebuild the library or set BUSBUDGET_PYTHON", exe);
    }
    else if (access(exe, X_OK) != 0) {
        snprintf(bb_problem, sizeof bb_problem, "BUSBUDGET_PYTHON=%s is not an executable file", exe);
        exe = bb_build_python;
        isolated = 1;
    }
    if (home != NULL && home[0] != 0 && !bb_home_has_stdlib(home)) {
        snprintf(bb_problem, sizeof bb_problem, "PYTHONHOME=%s holds no Python %d.%d standard library "
                 "(lib/python%d.%d/os.py); unset it or point it at the installation busbudget runs in",
                 home, PY_MAJOR_VERSION, PY_MINOR_VERSION, PY_MAJOR_VERSION, PY_MINOR_VERSION);
        exe = bb_build_python;
        isolated = 1;
    }
    if (isolated)
        PyConfig_InitIsolatedConfig(&config);
    else
        PyConfig_InitPythonConfig(&config);
    config.install_signal_handlers = initsigs;
    config.parse_argv = 0;
    status = PyConfig_SetBytesString(&config, &config.program_name, exe);
    if (!PyStatus_Exception(status))
        status = Py_InitializeFromConfig(&config);
    PyConfig_Clear(&config);
    if (PyStatus_Exception(status))
        Py_ExitStatusException(status);   /* what Py_InitializeEx does; nothing else is left */
}
""".replace("START_PYTHON", START_PYTHON)

# Declarations of C helpers the init code calls (not part of the public API).
INTERNAL_CDEF = "static const char *bb_start_problem(void);"


def check_python() -> None:
    """Fail with a clear message when this Python cannot be embedded by a shared library."""
    if sys.platform.startswith("linux") and not sysconfig.get_config_var("Py_ENABLE_SHARED"):
        raise SystemExit("cexport/build.py: this Python has no shared libpython (Py_ENABLE_SHARED=0); "
                         "cffi's embedding mode needs one.  Use a Python built with --enable-shared.")
    try:
        import cffi  # noqa: F401
    except ImportError:
        raise SystemExit("cexport/build.py: cffi is not installed (pip install 'busbudget[cexport]')") from None
    try:
        import budget  # noqa: F401
    except ImportError:
        raise SystemExit("cexport/build.py: the busbudget package is not importable by this Python; "
                         "install it (pip install -e .) in the environment the library should use") from None


def build(out: Path = DEFAULT_OUT, *, verbose: bool = False) -> Path:
    """Generate, compile and link the library into ``out``; returns the path of the .so."""
    import cffi

    check_python()
    out = Path(out).resolve()
    src = out / "src"
    src.mkdir(parents=True, exist_ok=True)
    header_text = HEADER.read_text(encoding="utf-8")

    ffi = cffi.FFI()
    ffi.embedding_api(api_declarations(header_text))
    ffi.cdef(INTERNAL_CDEF)
    libdir = sysconfig.get_config_var("LIBDIR")
    ffi.set_source(
        MODULE,
        C_SOURCE.replace("BUILD_PYTHON", _c_string(sys.executable)),
        include_dirs=[str(HERE)],
        define_macros=[("Py_InitializeEx", START_PYTHON)],
        extra_link_args=[f"-Wl,-rpath,{libdir}"] if libdir else [],
    )
    ffi.embedding_init_code(INIT_CODE)
    built = Path(ffi.compile(tmpdir=str(src), target=TARGET, verbose=verbose))
    lib = out / built.name
    shutil.move(str(built), lib)
    shutil.copyfile(HEADER, out / HEADER.name)
    return lib


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(prog="python cexport/build.py", description=__doc__.split("\n")[0])
    ap.add_argument("--out", type=Path, default=DEFAULT_OUT, help="output directory (default: %(default)s)")
    ap.add_argument("--verbose", action="store_true", help="show the compiler commands")
    args = ap.parse_args(argv)
    t0 = time.perf_counter()
    lib = build(args.out, verbose=args.verbose)
    print(f"built {lib} and {lib.parent / HEADER.name} in {time.perf_counter() - t0:.1f} s "
          f"(embedded Python: {sys.executable})")
    return 0


if __name__ == "__main__":
    sys.exit(main())
