/*
 * busbudget.h -- the C face of busbudget: reflection budgets and noise margins
 * of multi-drop buses, for production test rigs and hardware-in-the-loop code.
 *
 * Build:   python cexport/build.py --out DIR   ->  DIR/libbusbudget.so, DIR/busbudget.h
 * Link:    cc rig.c -IDIR -LDIR -lbusbudget -Wl,-rpath,DIR
 *
 * The library runs the same numba kernels as the Python package (no second
 * implementation of the math): it embeds the Python interpreter it was built
 * with (cffi embedding mode), which imports the busbudget package.
 *
 * RUN TIME NEEDS
 *   - the Python environment the library was built from (interpreter, numpy,
 *     numba, busbudget).  Its python executable is baked in at build time;
 *     set BUSBUDGET_PYTHON=/path/to/bin/python (same X.Y version) to use
 *     another environment.  PYTHONHOME / PYTHONPATH are honoured as usual,
 *     except that a PYTHONHOME without a standard library (or a missing
 *     BUSBUDGET_PYTHON) stops the runtime from starting, with a message,
 *     instead of letting CPython exit the host process.
 *     bb_runtime_info() says what was found.
 *   - a directory for numba's compiled-kernel cache.  By default numba writes
 *     next to the package's modules; on a read-only install set
 *     NUMBA_CACHE_DIR to a writable directory before the first call.  With a
 *     warm cache the first check of a process takes one to two seconds on a
 *     small machine (interpreter start, imports, cache load; see
 *     benchmarks/c_overhead.py); with a cold cache the kernels compile first
 *     (about a minute on 2 cores, once per cache directory).
 *   If the host process already runs Python, the library uses that interpreter.
 *
 * STATUS CODES
 *   Every function returns an int status.  0 is never returned by the library
 *   itself: 0 means the embedded runtime did not start (cffi returns 0 from
 *   every call when its initialisation failed; the reason is printed on
 *   stderr).  Treat 0 like an error; nothing will work in that process.
 *   BB_OK and BB_FAIL (> 0) are successes; errors are negative.
 *   After an error, bb_last_error() gives its message (kept per thread).
 *
 * THREADS
 *   Every function may be called from any thread at any time, also on the
 *   same handle.  Calls are correct under concurrency; the numerical work of
 *   concurrent calls runs one call at a time (each call already uses every
 *   core), so extra threads add safety, not speed.
 *
 * UNITS: SI everywhere (volts, seconds, ohms, farads, henries, metres).
 *
 * OWNERSHIP: the library never keeps or frees a caller's pointer; every output
 * goes into a caller-provided buffer of a size the caller states.  Designs
 * live inside the library behind integer handles until bb_close().
 *
 * Results are engineering estimates from a linear model (see the README,
 * "What the model assumes"): confirm them by measurement and with the part
 * makers' data; the applicable standards and the responsible engineer decide.
 */
#ifndef BUSBUDGET_H
#define BUSBUDGET_H

#include <stddef.h>

#ifdef __cplusplus
extern "C" {
#endif

/* Version of this header's API; compare with what bb_version() reports.
   2: bb_result gained worst_headroom, worst_limit and n_out_of_box (appended),
      its driver / receiver / edge name the worst case by the one rule (see
      bb_result), and bb_out_of_box_count / bb_out_of_box were added.  A
      program compiled against version 1 must be recompiled (bb_result grew). */
enum { BB_API_VERSION = 2 };

/* Status codes returned by every function (see STATUS CODES above). */
enum bb_status {
    BB_NOT_STARTED = 0,     /* never returned by the library: the runtime did not start */
    BB_OK = 1,              /* success; for bb_check / bb_batch: the bus passes */
    BB_FAIL = 2,            /* bb_check / bb_batch ran and the bus fails (not an error) */
    BB_ERR_NULL = -1,       /* a required pointer argument is NULL */
    BB_ERR_HANDLE = -2,     /* unknown or already closed design handle */
    BB_ERR_FILE = -3,       /* the design file cannot be opened or read */
    BB_ERR_DESIGN = -4,     /* the design text does not parse or is invalid */
    BB_ERR_PATH = -5,       /* no numeric parameter at that dotted path */
    BB_ERR_VALUE = -6,      /* non-finite or non-physical value */
    BB_ERR_SIZE = -7,       /* a count or buffer size is wrong or too small */
    BB_ERR_ARGUMENT = -8,   /* another bad argument (unknown tap, edge, index...) */
    BB_ERR_SIMULATION = -9, /* the engine could not produce a trustworthy result */
    BB_ERR_INTERNAL = -10   /* unexpected failure inside the library (a bug: report it) */
};

/* Edges (inputs, not statuses). */
enum bb_edge { BB_RISE = 0, BB_FALL = 1 };

/* Violation bits of one (driver, edge, receiver) case; same values as the
   Python package's budget.kernels.metrics.VIOL_* (checked at start-up). */
enum bb_violation {
    BB_VIOL_MARGIN = 1,         /* margin below the required minimum */
    BB_VIOL_NEVER_VALID = 2,    /* the edge never becomes valid */
    BB_VIOL_OVER_MAX = 4,       /* peak above the part's absolute maximum */
    BB_VIOL_UNDER_MIN = 8,      /* trough below the part's absolute minimum */
    BB_VIOL_NON_MONOTONIC = 16, /* the edge falls back inside the threshold region */
    BB_VIOL_NOT_SETTLED = 32    /* never settles into the settle band in the window */
};

/* Which term sets a case's headroom (bb_result.worst_limit); same values as
   the Python package's budget.kernels.metrics.LIMIT_* (checked at start-up). */
enum bb_limit {
    BB_LIMIT_MARGIN = 0,        /* margin - min_margin */
    BB_LIMIT_V_MAX = 1,         /* v_max - v_peak (the part's absolute maximum) */
    BB_LIMIT_V_MIN = 2          /* v_trough - v_min (the part's absolute minimum) */
};

/* Size of the name fields in bb_result (bytes, with the terminating NUL). */
enum { BB_NAME_SIZE = 64 };

/* A suggested size for bb_last_error()'s buffer (bytes). */
enum { BB_ERROR_SIZE = 1024 };

/* A design held by the library; > 0 when valid, never reused in a process. */
typedef int bb_handle;

/* Outcome of bb_check(): the nominal design (with every value set so far),
   every driver x both edges x every receiver.  Tap indices count the design
   file's [[tap]] entries from 0 (see bb_tap_name).

   The worst case is chosen by the rule the Python check and sweep use: a
   case with any violation before one without, then the lowest headroom, then
   the first in (driver, edge, receiver) order.  The headroom [V] of a case is
   the lowest of margin - min_margin, v_max - v_peak (if the part gives
   v_max) and v_trough - v_min (if it gives v_min).  So the worst case need
   not hold worst_margin (e.g. when an undershoot is closer to v_min than any
   margin is to min_margin). */
typedef struct bb_result {
    int passed;            /* 1: no violation anywhere; 0: at least one */
    double worst_margin;   /* [V] lowest noise margin over every case */
    int driver;            /* tap index of the driver in the worst case (-1: no case) */
    int receiver;          /* tap index of the receiver in that case (-1: no case) */
    int edge;              /* BB_RISE or BB_FALL for that case (-1: no case) */
    int n_cases;           /* (driver, edge, receiver) cases evaluated */
    int n_failing;         /* cases with at least one violation */
    int violations;        /* OR of the bb_violation bits over every case */
    char driver_name[BB_NAME_SIZE];   /* tap names, NUL-terminated; a name longer */
    char receiver_name[BB_NAME_SIZE]; /* than 63 bytes is cut (use the index) */
    /* appended in API version 2 */
    double worst_headroom; /* [V] headroom of the worst case (NaN: no case) */
    int worst_limit;       /* bb_limit: the term that sets worst_headroom (-1: no case) */
    int n_out_of_box;      /* values outside the design's [tolerances] box (see bb_out_of_box) */
} bb_result;

/* Version query.  Writes the API version the library was built with into
   *api_version and the package version ("0.1.0") into text (text_size bytes
   with the NUL).  Either pointer may be NULL to skip it.  Also the cheapest
   way to start the embedded runtime early and detect that it cannot start
   (returns 0).  Returns BB_OK; BB_ERR_SIZE if text is too small (text then
   holds ""). */
int bb_version(int *api_version, char *text, size_t text_size);

/* What the runtime found, as text: python executable and version, prefix,
   where the busbudget package was imported from, numba version and
   compiled-kernel cache directory.  Writes into buf (size bytes with the NUL).
   Returns BB_OK, BB_ERR_NULL, BB_ERR_SIZE (buf then holds ""). */
int bb_runtime_info(char *buf, size_t size);

/* The message of the calling thread's most recent failed call ("" if none
   failed yet); successful calls leave it as it is, so read it after a
   status < 0 (a clean-up call in between does not wipe it).  Messages name
   the file, path, value or argument involved.  Writes at most
   size bytes with the NUL; a longer message is cut and BB_ERR_SIZE returned.
   Returns BB_OK, BB_ERR_NULL (buf NULL or size 0), BB_ERR_SIZE. */
int bb_last_error(char *buf, size_t size);

/* Opens a design file (TOML, UTF-8; format in the README).  path is a file
   system path (NUL-terminated).  On success writes a new handle into
   *design; the caller owns it and releases it with bb_close().
   Returns BB_OK, BB_ERR_NULL, BB_ERR_FILE (cannot open/read),
   BB_ERR_DESIGN (does not parse or fails validation: the message names the
   file, table and key). */
int bb_open_file(const char *path, bb_handle *design);

/* Like bb_open_file() but from design-file text (UTF-8, NUL-terminated); the
   library copies what it needs, the caller keeps ownership of toml.
   Returns BB_OK, BB_ERR_NULL, BB_ERR_DESIGN. */
int bb_open_text(const char *toml, bb_handle *design);

/* Releases a design.  The handle is invalid afterwards (later use returns
   BB_ERR_HANDLE).  Returns BB_OK, BB_ERR_HANDLE. */
int bb_close(bb_handle design);

/* Replaces one numeric value of the design: path is the dotted design-file
   path ("lines.trunk.z0", "parts.xcvr.r_high", "segment.0.length",
   "tap.U1.stub.length", "termination.0.r"), value is in SI base units
   ([ohm], [V], [F], [H], [m], [s], [s/m], [ohm/m], [-]).  Checked like a value
   from Python (Design.with_values): sign, plausibility (3.1 for a c_pin is
   3.1 F and refused, the message suggesting 3.1 pF) and the rules the value
   takes part in; on any error the design is left unchanged.
   Returns BB_OK, BB_ERR_NULL, BB_ERR_HANDLE, BB_ERR_PATH (unknown path),
   BB_ERR_VALUE (not finite, implausible or non-physical, e.g. a negative z0). */
int bb_set(bb_handle design, const char *path, double value);

/* Like bb_set() with the value as text with its unit ("37 ohm", "1.8 pF",
   "6.7 ns/m"; UTF-8, NUL-terminated) or a plain number in SI base units.
   Unit names are case-insensitive where that is unambiguous (pF, pf, PF);
   "MOHM" or "mv" (milli or mega?) are refused with both readings.
   Returns BB_OK, BB_ERR_NULL, BB_ERR_HANDLE, BB_ERR_PATH, BB_ERR_VALUE
   (unreadable, wrong unit, ambiguous, implausible or non-physical). */
int bb_set_text(bb_handle design, const char *path, const char *value);

/* Reads one numeric value (SI base units) into *value.
   Returns BB_OK, BB_ERR_NULL, BB_ERR_HANDLE, BB_ERR_PATH. */
int bb_get(bb_handle design, const char *path, double *value);

/* Number of numeric parameters (dotted paths) of the design, into *count.
   Returns BB_OK, BB_ERR_NULL, BB_ERR_HANDLE. */
int bb_param_count(bb_handle design, int *count);

/* Dotted path of parameter index (0 .. count-1, design-file order) into buf
   (size bytes with the NUL).  Returns BB_OK, BB_ERR_NULL, BB_ERR_HANDLE,
   BB_ERR_ARGUMENT (index out of range), BB_ERR_SIZE (buf then holds ""). */
int bb_param_name(bb_handle design, int index, char *buf, size_t size);

/* Number of taps (devices on the bus, design-file order) into *count.
   Returns BB_OK, BB_ERR_NULL, BB_ERR_HANDLE. */
int bb_tap_count(bb_handle design, int *count);

/* Name of tap index (0 .. count-1) into buf (size bytes with the NUL).
   Returns BB_OK, BB_ERR_NULL, BB_ERR_HANDLE, BB_ERR_ARGUMENT (index out of
   range), BB_ERR_SIZE (buf then holds ""). */
int bb_tap_name(bb_handle design, int index, char *buf, size_t size);

/* Runs the budget check of the design as it stands (nominal values plus every
   bb_set so far; tolerance corners are not applied): every tap that can drive,
   both edges, every receiver.  Fills *result (caller-owned).
   Returns BB_OK (passes), BB_FAIL (at least one violation), BB_ERR_NULL,
   BB_ERR_HANDLE, BB_ERR_ARGUMENT (no tap can drive), BB_ERR_SIMULATION. */
int bb_check(bb_handle design, bb_result *result);

/* Number of the design's values (with every bb_set so far) that lie outside
   their [tolerances] interval, into *count (0 without a [tolerances] table).
   Such values are evaluated as given; a rig should report them (a wrong
   measurement, or a unit outside the spread the design was signed off for).
   Returns BB_OK, BB_ERR_NULL, BB_ERR_HANDLE. */
int bb_out_of_box_count(bb_handle design, int *count);

/* Entry index (0 .. count-1, [tolerances] order) of the out-of-box values:
   its dotted path into path (size bytes with the NUL), its value and the
   interval's min and max [SI] into *value, *min, *max (any of the three may
   be NULL).  Returns BB_OK, BB_ERR_NULL (path NULL), BB_ERR_HANDLE,
   BB_ERR_ARGUMENT (index out of range), BB_ERR_SIZE (path then holds ""). */
int bb_out_of_box(bb_handle design, int index, char *path, size_t size,
                  double *value, double *min, double *max);

/* Worst margin [V] each tap sees as a receiver, over every driver and both
   edges, into margins[index] for each tap index; NaN for taps that cannot
   receive.  count must equal the tap count.  Same evaluation as bb_check
   (reused if bb_check ran since the last bb_set).
   Returns BB_OK, BB_ERR_NULL, BB_ERR_HANDLE, BB_ERR_SIZE (count is not the
   tap count), BB_ERR_ARGUMENT, BB_ERR_SIMULATION. */
int bb_receiver_margins(bb_handle design, double *margins, size_t count);

/* Every margin [V]: margins[(driver * 2 + edge) * n + receiver] with n taps,
   driver and receiver tap indices, edge BB_RISE / BB_FALL; NaN where the
   driver tap cannot drive, the receiver tap cannot receive, or they are the
   same tap.  count must equal 2 * n * n.
   Returns BB_OK, BB_ERR_NULL, BB_ERR_HANDLE, BB_ERR_SIZE, BB_ERR_ARGUMENT,
   BB_ERR_SIMULATION. */
int bb_margin_table(bb_handle design, double *margins, size_t count);

/* Pin waveform of tap `tap` (its die node, what the input buffer sees) when
   tap `driver` drives `edge` (BB_RISE / BB_FALL): t[k] [s] from the start of
   the driver's ramp (t[0] = 0), v[k] [V].  The caller provides both arrays
   with room for `capacity` samples; *n_samples receives the number of
   samples of the waveform.  Ask for the size first with t = v = NULL and
   capacity = 0 (returns BB_OK and sets *n_samples).
   Returns BB_OK, BB_ERR_NULL (n_samples NULL, or t / v NULL with capacity
   > 0), BB_ERR_HANDLE, BB_ERR_SIZE (capacity < *n_samples; nothing written),
   BB_ERR_ARGUMENT (unknown tap, tap that cannot drive, bad edge),
   BB_ERR_SIMULATION. */
int bb_waveform(bb_handle design, const char *driver, int edge, const char *tap,
                double *t, double *v, size_t capacity, size_t *n_samples);

/* Evaluates n_variants variants of the design in one call (every driver,
   both edges, every receiver, as bb_check).  paths[0 .. n_paths-1] are dotted
   parameter paths; values holds n_variants rows of n_paths numbers (SI):
   values[i * n_paths + p] is the value of paths[p] in variant i.  Writes
   worst_margin[i] [V] (required, n_variants entries) and passed[i] (1 / 0;
   may be NULL).  The time step and window are fixed for the whole batch from
   the range of its values, so a variant's margin can differ from bb_check of
   the same values by the discretisation (well below the accuracy target).
   The design itself is not changed.
   Returns BB_OK (every variant passes), BB_FAIL (at least one fails),
   BB_ERR_NULL, BB_ERR_HANDLE, BB_ERR_SIZE (n_paths or n_variants is 0, n_paths more than the design's
   parameters, n_variants above 10,000,000: budget.limits.MAX_BATCH_VARIANTS),
   BB_ERR_PATH, BB_ERR_VALUE, BB_ERR_ARGUMENT (a path given twice),
   BB_ERR_SIMULATION. */
int bb_batch(bb_handle design, size_t n_paths, const char *const *paths,
             size_t n_variants, const double *values,
             double *worst_margin, int *passed);

#ifdef __cplusplus
}
#endif

#endif /* BUSBUDGET_H */
