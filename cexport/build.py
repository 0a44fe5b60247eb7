"""Build the C library: libbusbudget.so and its header busbudget.h (cffi embedding mode).

Usage (from the repository, with the project's Python)::

    python cexport/build.py [--out DIR]        # default DIR: cexport/build/
    python -m cexport.build [--out DIR]

DIR then holds ``libbusbudget.so.3`` (and the symlink ``libbusbudget.so``), a copy
of ``busbudget.h`` and ``busbudget.pc``; the C sources cffi generates stay in
``DIR/src/``.  Link a C program with
``cc prog.c $(PKG_CONFIG_PATH=DIR pkg-config --cflags --libs busbudget)`` or
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
  status codes never use 0 for anything else.  The library's own guard
  (``C_SOURCE``) checks the environment before starting Python, so a setting
  CPython cannot start from does not kill the host, and answers every call with
  0 and the reason (bb_last_error, bb_runtime_info, one line on stderr).
"""
from __future__ import annotations

import argparse
import contextlib
import os
import re
import shlex
import shutil
import sys
import sysconfig
import time
from pathlib import Path

HERE = Path(__file__).resolve().parent
HEADER = HERE / "busbudget.h"
DEFAULT_OUT = HERE / "build"
MODULE = "_busbudget_embedded"      # name of the cffi module inside the library


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


# Runs once, inside the embedded interpreter, at the first call into the library.  It never
# raises: a reason it cannot serve goes to bb_note_problem(), and the C guard below then
# answers every call with BB_NOT_STARTED (cffi would print a traceback and one line per call).
INIT_CODE = """\
import os
import sys
from MODULE import ffi, lib


def _why(exc):
    text = "%s: %s" % (type(exc).__name__, exc)
    where = "the Python at %s (%s, prefix %s)" % (sys.executable, sys.version.split()[0], sys.prefix)
    if isinstance(exc, RuntimeError) and "no locator available" in str(exc):
        return ("numba finds no writable directory for its compiled-kernel cache (NUMBA_CACHE_DIR is %s, "
                "the package directory and the per-user cache are not writable): set NUMBA_CACHE_DIR to a "
                "writable directory (%s)" % (os.environ.get("NUMBA_CACHE_DIR") or "unset", text))
    name = getattr(exc, "name", None)
    if isinstance(exc, ImportError) and name and name.split(".")[0] != "budget":
        return ("%s has no package %r, which busbudget needs (%s): install busbudget with its dependencies "
                "in that environment, or set BUSBUDGET_PYTHON to the python of one that has them"
                % (where, name.split(".")[0], text))
    return ("%s cannot import the busbudget package: %s; sys.path = %r.  It needs the Python environment the "
            "library was built with, or the python executable of another one holding busbudget, numpy, "
            "numba and cffi in BUSBUDGET_PYTHON" % (where, text, sys.path))


def _start():
    try:
        import budget.capi
    except BaseException as exc:
        return _why(exc)
    try:
        budget.capi.bind(ffi, lib)
    except BaseException as exc:
        return "busbudget could not set up its C functions: %s: %s" % (type(exc).__name__, exc)
    return ""


_problem = _start()
if _problem:
    lib.bb_note_problem(_problem.encode("utf-8", "replace"))
""".replace("MODULE", MODULE)

# cffi starts the interpreter with one call, Py_InitializeEx(0), inside its generated
# code.  The build renames that call (a -D macro) to START_PYTHON below, which says which
# python executable the interpreter stands for (PyConfig.program_name), so it finds that
# installation's standard library and site-packages (a virtual environment's pyvenv.cfg
# included) instead of guessing from the host's PATH.
START_PYTHON = "busbudget_start_python_"

# C code compiled into the library besides cffi's generated wrappers.  cffi places it after
# its embedding support and before the exported functions, so the macro at its end routes
# every exported function through bb_call_python(), which
#  - before Python is started (once per process), checks that the environment can start it:
#    the python executable exists, PYTHONHOME or the executable's installation holds the
#    standard library of the Python X.Y the library was built for (else CPython would exit
#    the host process with a fatal error) and not that of another version;
#  - when the runtime cannot serve (that check, or a reason the init code or the starter
#    noted), answers the call with 0 = BB_NOT_STARTED, writes the reason into the buffers of
#    bb_last_error / bb_runtime_info, and prints one line on stderr for the whole process.
C_SOURCE = r"""
#include <dirent.h>
#include <pthread.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <unistd.h>
#include "busbudget.h"

/* The python executable of the environment the library was built in. */
static const char bb_build_python[] = BUILD_PYTHON;

/* Why the runtime must not be used ("" if nothing is wrong); the first reason noted is kept. */
static char bb_problem[16384];
static const char *bb_exe;              /* the python executable the interpreter stands for */


static void bb_note_problem(const char *text)
{
    if (bb_problem[0] == 0)
        snprintf(bb_problem, sizeof bb_problem, "%s", text);
}

/* Does directory `prefix` hold a Python X.Y standard library (CPython's own landmarks)? */
static int bb_has_stdlib(const char *prefix, int major, int minor)
{
    char p[4096];
    snprintf(p, sizeof p, "%s/lib/python%d.%d/os.py", prefix, major, minor);
    if (access(p, R_OK) == 0)
        return 1;
    snprintf(p, sizeof p, "%s/lib/python%d.%d/os.pyc", prefix, major, minor);
    if (access(p, R_OK) == 0)
        return 1;
    snprintf(p, sizeof p, "%s/lib/python%d%d.zip", prefix, major, minor);
    return access(p, R_OK) == 0;
}

/* The X.Y of another Python's standard library under prefix ("" if none), into out. */
static void bb_other_stdlib(const char *prefix, char *out, size_t size)
{
    char lib[4096];
    DIR *d;
    struct dirent *e;
    out[0] = 0;
    snprintf(lib, sizeof lib, "%s/lib", prefix);
    if ((d = opendir(lib)) == NULL)
        return;
    while ((e = readdir(d)) != NULL) {
        int major, minor;
        if (sscanf(e->d_name, "python%d.%d", &major, &minor) == 2 && bb_has_stdlib(prefix, major, minor)) {
            snprintf(out, size, "%d.%d", major, minor);
            break;
        }
    }
    closedir(d);
}

/* The installation of an executable in directory dir: dir's parent (PREFIX/bin/python) or dir
   itself, whichever holds a Python X.Y standard library; the prefix goes into prefix (or "").
   Only these two are looked at: CPython would fall back to the prefix compiled into libpython
   and run another installation's library.  If another version's library is met, its X.Y goes
   into other. */
static void bb_find_prefix(const char *dir, char *prefix, size_t size, char *other, size_t other_size)
{
    char d[4096];
    int k;
    snprintf(d, sizeof d, "%s", dir);
    prefix[0] = other[0] = 0;
    for (k = 0; k < 2; k++) {
        char *slash = strrchr(d, '/');
        char up[4096];
        if (k == 0) {              /* the parent first */
            if (slash == NULL)
                continue;
            snprintf(up, sizeof up, "%.*s", slash == d ? 1 : (int)(slash - d), d);
        }
        else
            snprintf(up, sizeof up, "%s", d);
        if (bb_has_stdlib(up, PY_MAJOR_VERSION, PY_MINOR_VERSION)) {
            snprintf(prefix, size, "%s", up);
            return;
        }
        if (other[0] == 0)
            bb_other_stdlib(up, other, other_size);
    }
}

/* The value of `key` in a virtual environment's pyvenv.cfg ("" if absent). */
static void bb_venv_key(const char *cfg, const char *key, char *out, size_t size)
{
    char line[4096];
    FILE *f = fopen(cfg, "r");
    out[0] = 0;
    if (f == NULL)
        return;
    while (fgets(line, sizeof line, f) != NULL) {
        char *eq = strchr(line, '='), *k = line, *v, *end;
        if (eq == NULL)
            continue;
        *eq = 0;
        while (*k == ' ' || *k == '\t') k++;
        end = eq;
        while (end > k && (end[-1] == ' ' || end[-1] == '\t')) *--end = 0;
        if (strcmp(k, key) != 0)
            continue;
        v = eq + 1;
        while (*v == ' ' || *v == '\t') v++;
        v[strcspn(v, "\r\n")] = 0;
        snprintf(out, size, "%s", v);
        break;
    }
    fclose(f);
}

/* Runs once, before Python starts: can the chosen environment start this Python X.Y? */
static void bb_check_environment(void)
{
    const char *env_exe = getenv("BUSBUDGET_PYTHON"), *home = getenv("PYTHONHOME");
    char what[4200], dir[4096], cfg[4200], prefix[4096], other[64], version[256], real[4096];
    int built_major = PY_MAJOR_VERSION, built_minor = PY_MINOR_VERSION;

    if (env_exe != NULL && env_exe[0] != 0) {
        bb_exe = env_exe;
        snprintf(what, sizeof what, "BUSBUDGET_PYTHON=%s", env_exe);
    }
    else {
        bb_exe = bb_build_python;
        snprintf(what, sizeof what, "the python the library was built with, %s,", bb_build_python);
    }
    if (access(bb_exe, X_OK) != 0) {
        snprintf(bb_problem, sizeof bb_problem, "%s is not an executable file%s", what,
                 bb_exe == bb_build_python ? " (it is gone: rebuild the library or set BUSBUDGET_PYTHON)" : "");
        return;
    }
    if (home != NULL && home[0] != 0) {
        char h[4096];
        snprintf(h, sizeof h, "%.*s", (int)strcspn(home, ":"), home);
        if (!bb_has_stdlib(h, built_major, built_minor)) {
            bb_other_stdlib(h, other, sizeof other);
            if (other[0])
                snprintf(bb_problem, sizeof bb_problem, "Python version mismatch: PYTHONHOME=%s holds the "
                         "standard library of Python %s, but the library was built for Python %d.%d (it links "
                         "libpython%d.%d); unset PYTHONHOME or point it at a Python %d.%d installation", home,
                         other, built_major, built_minor, built_major, built_minor, built_major, built_minor);
            else
                snprintf(bb_problem, sizeof bb_problem, "PYTHONHOME=%s holds no Python %d.%d standard library "
                         "(lib/python%d.%d/os.py); unset it or point it at the installation busbudget runs in",
                         home, built_major, built_minor, built_major, built_minor);
        }
        return;   /* CPython takes the standard library from PYTHONHOME, whatever the executable */
    }
    /* a virtual environment: pyvenv.cfg next to the executable or one directory up */
    snprintf(dir, sizeof dir, "%s", bb_exe);
    if (strrchr(dir, '/') != NULL) *strrchr(dir, '/') = 0; else snprintf(dir, sizeof dir, ".");
    snprintf(cfg, sizeof cfg, "%s/../pyvenv.cfg", dir);
    if (access(cfg, R_OK) != 0)
        snprintf(cfg, sizeof cfg, "%s/pyvenv.cfg", dir);
    if (access(cfg, R_OK) == 0) {
        int major, minor;
        bb_venv_key(cfg, "version", version, sizeof version);
        if (version[0] == 0)
            bb_venv_key(cfg, "version_info", version, sizeof version);
        if (sscanf(version, "%d.%d", &major, &minor) == 2 && (major != built_major || minor != built_minor)) {
            snprintf(bb_problem, sizeof bb_problem, "Python version mismatch: %s belongs to a Python %s "
                     "environment (%s), but the library was built for Python %d.%d (it links libpython%d.%d); "
                     "use a Python %d.%d environment holding busbudget, or rebuild the library with that "
                     "Python", what, version, cfg, built_major, built_minor, built_major, built_minor,
                     built_major, built_minor);
            return;
        }
        bb_venv_key(cfg, "home", dir, sizeof dir);
    }
    else if (realpath(bb_exe, real) != NULL) {
        snprintf(dir, sizeof dir, "%s", real);
        if (strrchr(dir, '/') != NULL) *strrchr(dir, '/') = 0;
    }
    bb_find_prefix(dir, prefix, sizeof prefix, other, sizeof other);
    if (prefix[0] == 0 && other[0])
        snprintf(bb_problem, sizeof bb_problem, "Python version mismatch: %s belongs to a Python %s "
                 "installation (found lib/python%s next to %s), but the library was built for Python %d.%d "
                 "(it links libpython%d.%d); use a Python %d.%d environment holding busbudget, or rebuild the "
                 "library with that Python", what, other, other, dir, built_major, built_minor, built_major,
                 built_minor, built_major, built_minor);
    else if (prefix[0] == 0)
        snprintf(bb_problem, sizeof bb_problem, "%s has no Python %d.%d standard library (no "
                 "lib/python%d.%d/os.py in %s or its parent); point BUSBUDGET_PYTHON at the python of a complete "
                 "installation or virtual environment", what, built_major, built_minor, built_major,
                 built_minor, dir);
}

void START_PYTHON(int initsigs)
{
    PyConfig config;
    PyStatus status;
    PyObject *backend;

    PyConfig_InitPythonConfig(&config);
    config.install_signal_handlers = initsigs;
    config.parse_argv = 0;
    status = PyConfig_SetBytesString(&config, &config.program_name, bb_exe ? bb_exe : bb_build_python);
    if (!PyStatus_Exception(status))
        status = Py_InitializeFromConfig(&config);
    PyConfig_Clear(&config);
    if (PyStatus_Exception(status))
        Py_ExitStatusException(status);   /* what Py_InitializeEx does; bb_check_environment avoids it */
    /* cffi's module needs its backend: without it cffi would print a traceback */
    backend = PyImport_ImportModule("_cffi_backend");
    if (backend != NULL) {
        Py_DECREF(backend);
        return;
    }
    {
        PyObject *type, *value, *tb, *text = NULL;
        char why[4096];
        PyErr_Fetch(&type, &value, &tb);
        if (value != NULL)
            text = PyObject_Str(value);
        snprintf(why, sizeof why, "the Python environment of %s has no cffi (importing _cffi_backend: %s); "
                 "install busbudget with its dependencies there, or set BUSBUDGET_PYTHON to the python of the "
                 "environment the library was built with", bb_exe ? bb_exe : bb_build_python,
                 text != NULL && PyUnicode_Check(text) ? PyUnicode_AsUTF8(text) : "?");
        PyErr_Clear();
        Py_XDECREF(text);
        Py_XDECREF(type);
        Py_XDECREF(value);
        Py_XDECREF(tb);
        bb_note_problem(why);
        PySys_SetObject("stderr", Py_None);   /* the reason is kept; no traceback from cffi */
    }
}

static pthread_once_t bb_once = PTHREAD_ONCE_INIT;
static int bb_said;                     /* the one stderr line was written */

static void bb_preflight(void)
{
    if (!Py_IsInitialized())            /* a host that already runs Python: use it as it is */
        bb_check_environment();
}

/* The answer of every call when the runtime cannot serve: BB_NOT_STARTED, and the reason. */
static void bb_not_started(struct _cffi_externpy_s *externpy, char *args)
{
    if (__sync_lock_test_and_set(&bb_said, 1) == 0)
        fprintf(stderr, "libbusbudget: the runtime did not start (every call returns BB_NOT_STARTED = 0): %s\n",
                bb_problem);
    const char *name = strrchr(externpy->name, '.');   /* cffi names it "module.function" */
    name = name != NULL ? name + 1 : externpy->name;
    if (strcmp(name, "bb_last_error") == 0 || strcmp(name, "bb_runtime_info") == 0) {
        char *buf = *(char **)(args + BB_ARG0);
        size_t size = *(size_t *)(args + BB_ARG1);
        if (buf != NULL && size > 0)
            snprintf(buf, size, "the busbudget runtime did not start: %s", bb_problem);
    }
    memset(args, 0, externpy->size_of_result);
}

static void bb_call_python(struct _cffi_externpy_s *externpy, char *args)
{
    pthread_once(&bb_once, bb_preflight);
    if (bb_problem[0] == 0 && cffi_start_python() == 0 && bb_problem[0] == 0) {
        _cffi_call_python(externpy, args);
        return;
    }
    if (bb_problem[0] == 0)
        bb_note_problem("cffi could not set up the library's Python module (see the message above)");
    bb_not_started(externpy, args);
}

/* from here on (cffi's exported functions): every call goes through bb_call_python */
#define _cffi_call_python bb_call_python
""".replace("START_PYTHON", START_PYTHON)

# Declarations of C helpers the init code calls (not part of the public API).
INTERNAL_CDEF = """\
static void bb_note_problem(const char *text);
"""

# Where cffi's exported wrappers put the two arguments of bb_last_error / bb_runtime_info
# (char *buf, size_t size) in the block they pass to Python; build() checks the generated code.
ARG_OFFSETS = (0, 8)
SONAME_VERSION = 3          # libbusbudget.so.3: the API version whose programs it runs


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
    """Generate, compile and link the library into ``out``; returns the path of the .so.

    ``out`` then holds ``libbusbudget.so.3`` (SONAME ``libbusbudget.so.3``, run path
    ``$ORIGIN`` then this Python's LIBDIR, so a libpython copied next to the library
    is found first), the symlink ``libbusbudget.so`` for linking, ``busbudget.h`` and
    ``busbudget.pc`` (pkg-config; its paths are relative to where the file lies, so
    the directory can be moved as a whole).
    """
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
    soname = f"libbusbudget.so.{SONAME_VERSION}"
    run_path = "$ORIGIN" + (f":{libdir}" if libdir else "")
    ffi.set_source(
        MODULE,
        C_SOURCE.replace("BUILD_PYTHON", _c_string(sys.executable)),
        include_dirs=[str(HERE)],
        define_macros=[("Py_InitializeEx", START_PYTHON), ("BB_ARG0", str(ARG_OFFSETS[0])),
                       ("BB_ARG1", str(ARG_OFFSETS[1]))],
        extra_link_args=[f"-Wl,-soname,{soname}", f"-Wl,-rpath,{run_path}", "-pthread"],
    )
    ffi.embedding_init_code(INIT_CODE)
    with _linker_without_run_path():
        built = Path(ffi.compile(tmpdir=str(src), target=soname, verbose=verbose))
    _check_argument_layout((src / f"{MODULE}.c").read_text(encoding="utf-8"))
    lib = out / soname
    if built != lib:
        shutil.move(str(built), lib)
    link = out / "libbusbudget.so"
    if link.is_symlink() or link.exists():
        link.unlink()
    link.symlink_to(soname)
    shutil.copyfile(HEADER, out / HEADER.name)
    (out / "busbudget.pc").write_text(pkg_config_text(), encoding="utf-8")
    return lib


@contextlib.contextmanager
def _linker_without_run_path():
    """Link with this Python's LDSHARED minus its own ``-Wl,-rpath`` options.

    Some builds of Python (pyenv's, for one) put ``-Wl,-rpath,LIBDIR`` into
    LDSHARED; it would come before ``$ORIGIN`` and a libpython shipped next to
    the library would never be found.  The run path is then exactly the one
    given in :func:`build`.  (LDSHARED set by the user is left alone.)
    """
    if "LDSHARED" in os.environ or not sysconfig.get_config_var("LDSHARED"):
        yield
        return
    words = [w for w in shlex.split(sysconfig.get_config_var("LDSHARED")) if not w.startswith("-Wl,-rpath")]
    os.environ["LDSHARED"] = shlex.join(words)
    try:
        yield
    finally:
        del os.environ["LDSHARED"]


def _check_argument_layout(c_text: str) -> None:
    """Stop the build if cffi's wrappers do not pass (buf, size) where bb_not_started() reads them."""
    for name in ("bb_last_error", "bb_runtime_info"):
        body = re.search(rf"int {name}\(char \* a0, size_t a1\)\s*\{{(.*?)\n\}}", c_text, re.S)
        want = [f"*(char * *)(p + {ARG_OFFSETS[0]}) = a0;", f"*(size_t *)(p + {ARG_OFFSETS[1]}) = a1;"]
        if body is None or not all(w in body.group(1) for w in want):
            raise SystemExit(f"cexport/build.py: cffi's wrapper of {name} is not laid out as expected "
                             f"(arguments at offsets {ARG_OFFSETS}); update ARG_OFFSETS for this cffi version")


def pkg_config_text() -> str:
    """busbudget.pc: paths relative to the file's own directory (``${pcfiledir}``), so the build can move."""
    from budget import __version__

    return "\n".join([
        "# generated by cexport/build.py; the paths follow this file's directory",
        "prefix=${pcfiledir}",
        "libdir=${prefix}",
        "includedir=${prefix}",
        "",
        "Name: busbudget",
        "Description: reflection budgets and noise margins of multi-drop buses (embeds Python "
        f"{sys.version_info.major}.{sys.version_info.minor})",
        f"Version: {__version__}",
        "Cflags: -I${includedir}",
        "Libs: -L${libdir} -lbusbudget -Wl,-rpath,${libdir}",
        "",
    ])


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
