/*
 * busbudget.h -- the C face of busbudget: reflection budgets and noise margins
 * of multi-drop buses, for production test rigs and hardware-in-the-loop code.
 *
 * Build:   python cexport/build.py --out DIR   ->  DIR/libbusbudget.so.3 (SONAME
 *          libbusbudget.so.3, run path $ORIGIN then the build Python's LIBDIR),
 *          DIR/libbusbudget.so (link), DIR/busbudget.h, DIR/busbudget.pc
 * Link:    cc rig.c $(PKG_CONFIG_PATH=DIR pkg-config --cflags --libs busbudget)
 *          (or cc rig.c -IDIR -LDIR -lbusbudget -Wl,-rpath,DIR); DIR may be moved
 *          or copied as a whole: the .pc file's paths follow its own location.
 *
 * The library runs the same numba kernels as the Python package (no second
 * implementation of the math): it embeds the Python interpreter it was built
 * with (cffi embedding mode), which imports the busbudget package.
 *
 * RUN TIME NEEDS
 *   - the Python environment the library was built from (interpreter, numpy,
 *     numba, busbudget).  Its python executable is baked in at build time;
 *     set BUSBUDGET_PYTHON=/path/to/bin/python (same X.Y version) to use
 *     another environment.  PYTHONHOME / PYTHONPATH are honoured as usual.
 *     Before Python starts, the library checks that it can: the executable
 *     exists, and PYTHONHOME (if set) or the executable's installation (the
 *     directory above its bin/, a virtual environment's "home") holds the
 *     lib/pythonX.Y standard library of the Python the library links.  If
 *     not (a copied libpython with no standard library, another Python
 *     version), Python is not started at all -- CPython would exit the host
 *     process -- and every call returns BB_NOT_STARTED with the reason.
 *     bb_runtime_info() says what was found.
 *   - a directory for numba's compiled-kernel cache.  By default numba writes
 *     next to the package's modules; on a read-only install set
 *     NUMBA_CACHE_DIR to a writable directory before the first call (numba
 *     quietly falls back to the package directory or its per-user cache when
 *     NUMBA_CACHE_DIR is not writable; bb_runtime_info names the directory
 *     in use).  With a
 *     warm cache the first check of a process takes one to two seconds on a
 *     small machine (interpreter start, imports, cache load; see
 *     benchmarks/c_overhead.py); with a cold cache the kernels compile first
 *     (about a minute on 2 cores, once per cache directory).
 *   If the host process already runs Python, the library uses that interpreter.
 *
 * STATUS CODES
 *   Every function returns an int status.  0 is never returned by the library
 *   itself: 0 means the embedded runtime did not start (wrong or incomplete
 *   Python environment, a package missing, no writable kernel cache; the
 *   reason is printed on stderr, one line for the whole process).  Treat 0
 *   like an error; nothing will work in that process.  bb_last_error() and
 *   bb_runtime_info() then still fill their buffer with the reason (and
 *   return 0).
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
      program compiled against version 1 must be recompiled (bb_result grew).
   3: calls for production rigs: bb_tolerance_count / bb_tolerance (the design's
      tolerance box), bb_reset (back to the values as opened), bb_judge (a
      captured edge in caller arrays, struct bb_judgement) and bb_log (the run
      record the command line writes); status codes BB_ERR_CAPTURE and
      BB_ERR_RECORD.  When the runtime cannot start, bb_last_error and
      bb_runtime_info still give the reason (and return BB_NOT_STARTED).
      Nothing of version 2 changed: a version 2 program runs unchanged. */
enum { BB_API_VERSION = 3 };

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
    BB_ERR_INTERNAL = -10,  /* unexpected failure inside the library (a bug: report it) */
    /* added in API version 3 */
    BB_ERR_CAPTURE = -11,   /* bb_judge: the captured waveform cannot be judged (see bb_judge) */
    BB_ERR_RECORD = -12     /* bb_log: the record was not written whole (disk full...); log unchanged */
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
   where the busbudget package was imported from, numba version, the
   directory numba caches the compiled kernels in (its own choice: under
   NUMBA_CACHE_DIR if that is set and writable, else next to the package or
   in the per-user cache; an unused NUMBA_CACHE_DIR is named as such).
   Writes into buf (size bytes with the NUL).
   Returns BB_OK, BB_ERR_NULL, BB_ERR_SIZE (buf then holds "").  When the
   runtime did not start: the reason, and BB_NOT_STARTED. */
int bb_runtime_info(char *buf, size_t size);

/* The message of the calling thread's most recent failed call ("" if none
   failed yet); successful calls leave it as it is, so read it after a
   status < 0 (a clean-up call in between does not wipe it).  Messages name
   the file, path, value or argument involved.  Writes at most
   size bytes with the NUL; a longer message is cut and BB_ERR_SIZE returned.
   Returns BB_OK, BB_ERR_NULL (buf NULL or size 0), BB_ERR_SIZE.  When the
   runtime did not start: why (cut to size), and BB_NOT_STARTED. */
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
   "6.7 ns/m"; UTF-8, NUL-terminated).  Text without a unit ("22.4") is
   refused with a message saying which unit to write: give SI numbers
   with bb_set().
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

/* ---- added in API version 3: calls for production rigs ---- */

/* Number of entries of the design's tolerance box ([tolerances] table: the
   box `busbudget check` varies; Python: budget.Design.tolerances) into
   *count; 0 without a [tolerances] table.  Values set with bb_set /
   bb_set_text do not change the box.
   Returns BB_OK, BB_ERR_NULL, BB_ERR_HANDLE. */
int bb_tolerance_count(bb_handle design, int *count);

/* Entry index (0 .. count-1, [tolerances] order) of the tolerance box: its
   dotted path into path (size bytes with the NUL) and the interval's
   absolute bounds [SI] into *min and *max (either may be NULL).  A
   tolerance written as "10%" or "+/- 2 ohm" comes back as its absolute
   bounds around the nominal value.
   Returns BB_OK, BB_ERR_NULL (path NULL), BB_ERR_HANDLE, BB_ERR_ARGUMENT
   (index out of range), BB_ERR_SIZE (path then holds ""). */
int bb_tolerance(bb_handle design, int index, char *path, size_t size, double *min, double *max);

/* Undoes every bb_set / bb_set_text of the handle: the design is again the
   one bb_open_file / bb_open_text read (nominal values), as if just opened
   (also forgets the last bb_check / bb_judge for bb_log).  Use it between
   units on a rig that keeps one handle open.
   Returns BB_OK, BB_ERR_HANDLE. */
int bb_reset(bb_handle design);

/* Outcome of bb_judge(): one captured edge at one receiver, judged with the
   metric, violation and headroom rules of the simulation (the same numbers
   as `busbudget judge` and budget.judge.judge_capture).  Voltages [V],
   times [s].  NaN marks a value that does not exist (no margin when the
   edge never becomes valid; flight times without t_edge; the offset when the
   capture has too few pre-edge samples). */
typedef struct bb_judgement {
    int passed;            /* 1: no violation; 0: at least one */
    int violations;        /* OR of the bb_violation bits */
    double margin;         /* [V] noise margin after the guardband (high level on a rise, low on a fall) */
    double headroom;       /* [V] lowest of margin - min_margin, v_max - v_peak, v_trough - v_min
                              (ratings moved inward by the guardband) */
    int limit;             /* bb_limit: the term that sets headroom */
    int monotonic;         /* 1: no fall-back inside the threshold region */
    double v_lo, v_hi;     /* [V] DC levels the trace was judged against (the design's, at this pin) */
    double overshoot;      /* [V] above v_hi (rise) / below v_lo (fall) */
    double undershoot;     /* [V] below v_lo (rise) / above v_hi (fall) */
    double ringback;       /* [V] */
    double v_peak, v_trough; /* [V] highest and lowest sample */
    double t_switch;       /* [s] first threshold crossing, from the driver's ramp start when
                              t_edge is given, else on the capture's own time axis */
    double t_valid;        /* [s] last entry into the valid region, same time base */
    double settle_time;    /* [s] same time base (NaN: never settles) */
    double flight_min, flight_max; /* [s] (NaN without t_edge) */
    double offset;         /* [V] median of the pre-edge samples minus the design's starting level */
    double noise_sigma;    /* [V] noise estimate used */
    double hysteresis;     /* [V] fall-back hysteresis used (6 x noise_sigma) */
} bb_judgement;

/* Judges a captured edge at tap `receiver` when tap `driver` drives `edge`
   (BB_RISE / BB_FALL): t[0 .. n_samples-1] [s] strictly increasing (any
   origin, pre-trigger samples welcome), v[...] [V] the receiver pin's
   voltage.  guardband [V] >= 0 (measurement uncertainty, 0 for none) is
   subtracted from the margin and from the headroom to the ratings.  t_edge
   [s] is when the driver's ramp starts on the capture's time axis; NaN if
   not known (flight times are then NaN, the voltage metrics do not depend
   on it).  Defaults of `busbudget judge`: levels from the design, probe
   offset kept (it counts against the margin), noise estimated from the
   pre-edge samples.  Reads the caller's arrays during the call only and
   fills *result (caller-owned).  The design as it stands (nominal values
   plus every bb_set) gives thresholds, ratings and levels; the result is
   kept for bb_log.
   Returns BB_OK (passes), BB_FAIL (violations), BB_ERR_NULL, BB_ERR_HANDLE,
   BB_ERR_ARGUMENT (unknown tap, driver that cannot drive, receiver that
   cannot receive, bad edge, guardband < 0 or not finite, t_edge infinite),
   BB_ERR_SIZE (n_samples < 2 or above 20,000,000), BB_ERR_CAPTURE (a sample
   not finite, time not strictly increasing, the trace never reaches the
   entry threshold or starts past it, or ends before the edge settles:
   the message says which), BB_ERR_SIMULATION. */
int bb_judge(bb_handle design, const char *driver, int edge, const char *receiver,
             const double *t, const double *v, size_t n_samples, double guardband, double t_edge,
             bb_judgement *result);

/* Appends the run record of the handle's last bb_check or bb_judge to the
   log file log_path (created if missing): one JSON line, schema
   busbudget.record/1, the record `busbudget check --nominal` / `busbudget
   judge` write with --log FILE --serial SN (time, serial, design file hash,
   input hashes, verdict, worst case, margins, tool version).  A record is
   written whole or not at all, under a lock shared with every other writer
   of the log (several rig processes may share one log).  Inputs hashed:
   "--set": the values set, one "PATH=VALUE" line per path (bb_set writes
   the shortest text that reads back as the same double, bb_set_text the
   text given); for a judge "<capture from C>": the little-endian doubles of
   t then v.  serial: UTF-8, non-empty, no control characters.  A check
   record holds bb_check's numbers (Python: budget.check.check(design,
   nominal=True)); `busbudget check --set` narrows the tolerance box to the
   measured values, which sets its time step, so its numbers can differ from
   them by the discretisation (within the accuracy target).
   Returns BB_OK, BB_ERR_NULL, BB_ERR_HANDLE, BB_ERR_ARGUMENT (no check or
   judge since open / reset, or a bad serial), BB_ERR_FILE (the log cannot be
   opened for appending), BB_ERR_RECORD (not written: disk full or I/O
   error; the log is unchanged). */
int bb_log(bb_handle design, const char *log_path, const char *serial);

#ifdef __cplusplus
}
#endif

#endif /* BUSBUDGET_H */
