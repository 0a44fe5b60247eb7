/*
 * api_probe.c -- drives libbusbudget from C for tests/test_cexport.py, which
 * compares every number printed here with the Python API on the same inputs.
 * Numbers are printed with %.17g, enough to read the same double back, or
 * (the API version 3 calls) with %a, the exact bits (Python: float.fromhex).
 *
 *   api_probe init
 *   api_probe check  DESIGN [PATH=VALUE ...]
 *   api_probe wave   DESIGN DRIVER rise|fall TAP [PATH=VALUE ...]
 *   api_probe batch  DESIGN N PATH LO HI [PATH LO HI ...]
 *   api_probe errors DESIGN BAD_DESIGN
 *   api_probe rig    DESIGN LOG SERIAL [PATH=VALUE ...]
 *       tolerance box, set, check, bb_log, bb_reset, check again
 *   api_probe judge  DESIGN DRIVER rise|fall RECEIVER GUARDBAND T_EDGE CAPTURE LOG SERIAL [PATH=VALUE ...]
 *       CAPTURE: a text file of "t v" lines in C99 hex floats; T_EDGE "nan" if not known
 *   api_probe logthreads DESIGN LOG THREADS RECORDS
 *       THREADS pthreads, each with its own handle (lines.route.z0 = 44 + thread ohm), one
 *       bb_check and RECORDS bb_log calls into the same LOG, serial "T<thread>"
 *
 * Exit status: 0 done, 1 an unexpected status (printed), 3 the runtime did
 * not start (a call returned BB_NOT_STARTED = 0).
 */
#include <math.h>
#include <pthread.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "busbudget.h"

static int not_started(const char *call)
{
    printf("not-started %s\n", call);
    return 3;
}

static int unexpected(const char *call, int status)
{
    char message[BB_ERROR_SIZE];
    bb_last_error(message, sizeof message);
    printf("unexpected %s %d %s\n", call, status, message);
    return 1;
}

/* Open DESIGN and apply PATH=VALUE arguments; returns 0 or an exit status. */
static int open_and_set(const char *file, int n, char **args, bb_handle *design)
{
    int i, status = bb_open_file(file, design);
    if (status == BB_NOT_STARTED)
        return not_started("bb_open_file");
    if (status != BB_OK)
        return unexpected("bb_open_file", status);
    for (i = 0; i < n; i++) {
        char *eq = strchr(args[i], '=');
        double value;
        if (eq == NULL) {
            printf("bad argument %s\n", args[i]);
            return 1;
        }
        char *end;
        *eq = '\0';
        value = strtod(eq + 1, &end);
        if (*end != '\0') {   /* not a plain number: a value with its unit */
            status = bb_set_text(*design, args[i], eq + 1);
            printf("settext %s %d %s\n", args[i], status, eq + 1);
            if (status != BB_OK)
                return unexpected("bb_set_text", status);
            continue;
        }
        status = bb_set(*design, args[i], value);
        printf("set %s %.17g %d\n", args[i], value, status);
        if (status != BB_OK)
            return unexpected("bb_set", status);
    }
    return 0;
}

static int cmd_init(void)
{
    int api = -1, status;
    char text[64] = "";
    status = bb_version(&api, text, sizeof text);
    printf("version %d %d %s\n", status, api, text);
    if (status == BB_NOT_STARTED) {
        /* the reason is still there for the rig to log */
        char why[BB_ERROR_SIZE] = "", info[4096] = "";
        int s1 = bb_last_error(why, sizeof why), s2 = bb_runtime_info(info, sizeof info), i, s3 = 0;
        bb_result r;
        bb_handle h = 0;
        printf("last-error %d %s\n", s1, why);
        printf("runtime-info-not-started %d %s\n", s2, info);
        /* every other call: BB_NOT_STARTED too */
        for (i = 0; i < 3; i++)
            s3 |= bb_open_file("/nonexistent", &h) | bb_check(1, &r) | bb_tolerance_count(1, &i);
        printf("other-calls %d\n", s3);
        return not_started("bb_version");
    }
    printf("header-api %d\n", BB_API_VERSION);
    {
        char info[4096];
        int info_status = bb_runtime_info(info, sizeof info);
        printf("runtime-info %d\n%s\n", info_status, info);
    }
    return status == BB_OK ? 0 : 1;
}

static int cmd_check(const char *file, int n, char **args)
{
    bb_handle design;
    bb_result r;
    int status, n_taps, i;
    double *rm, *table;
    char name[256];

    if ((status = open_and_set(file, n, args, &design)) != 0)
        return status;
    status = bb_check(design, &r);
    if (status != BB_OK && status != BB_FAIL)
        return unexpected("bb_check", status);
    printf("check %d %d %.17g %d %d %d %d %d %d %s %s %.17g %d %d\n", status, r.passed, r.worst_margin,
           r.driver, r.receiver, r.edge, r.n_cases, r.n_failing, r.violations, r.driver_name,
           r.receiver_name, r.worst_headroom, r.worst_limit, r.n_out_of_box);
    {
        int count = -1;
        if ((status = bb_out_of_box_count(design, &count)) != BB_OK)
            return unexpected("bb_out_of_box_count", status);
        printf("oob-count %d\n", count);
        for (i = 0; i < count; i++) {
            double value, lo, hi;
            if ((status = bb_out_of_box(design, i, name, sizeof name, &value, &lo, &hi)) != BB_OK)
                return unexpected("bb_out_of_box", status);
            printf("oob %s %.17g %.17g %.17g\n", name, value, lo, hi);
        }
    }

    if ((status = bb_tap_count(design, &n_taps)) != BB_OK)
        return unexpected("bb_tap_count", status);
    printf("taps %d\n", n_taps);
    for (i = 0; i < n_taps; i++) {
        if ((status = bb_tap_name(design, i, name, sizeof name)) != BB_OK)
            return unexpected("bb_tap_name", status);
        printf("tap %d %s\n", i, name);
    }
    rm = malloc(sizeof(double) * (size_t)n_taps);
    table = malloc(sizeof(double) * 2 * (size_t)n_taps * (size_t)n_taps);
    if ((status = bb_receiver_margins(design, rm, (size_t)n_taps)) != BB_OK)
        return unexpected("bb_receiver_margins", status);
    for (i = 0; i < n_taps; i++)
        printf("rmargin %d %.17g\n", i, rm[i]);
    if ((status = bb_margin_table(design, table, 2 * (size_t)n_taps * (size_t)n_taps)) != BB_OK)
        return unexpected("bb_margin_table", status);
    for (i = 0; i < 2 * n_taps * n_taps; i++)
        printf("table %d %.17g\n", i, table[i]);
    free(rm);
    free(table);

    {   /* every parameter path and its value */
        int n_params;
        double value;
        if ((status = bb_param_count(design, &n_params)) != BB_OK)
            return unexpected("bb_param_count", status);
        for (i = 0; i < n_params; i++) {
            if ((status = bb_param_name(design, i, name, sizeof name)) != BB_OK)
                return unexpected("bb_param_name", status);
            if ((status = bb_get(design, name, &value)) != BB_OK)
                return unexpected("bb_get", status);
            printf("param %s %.17g\n", name, value);
        }
    }
    if ((status = bb_close(design)) != BB_OK)
        return unexpected("bb_close", status);
    return 0;
}

static int cmd_wave(const char *file, const char *driver, const char *edge, const char *tap,
                    int n, char **args)
{
    bb_handle design;
    size_t n_samples = 0, k;
    double *t, *v;
    int status, e = strcmp(edge, "rise") == 0 ? BB_RISE : BB_FALL;

    if ((status = open_and_set(file, n, args, &design)) != 0)
        return status;
    status = bb_waveform(design, driver, e, tap, NULL, NULL, 0, &n_samples);
    if (status != BB_OK)
        return unexpected("bb_waveform (size)", status);
    t = malloc(sizeof(double) * n_samples);
    v = malloc(sizeof(double) * n_samples);
    status = bb_waveform(design, driver, e, tap, t, v, n_samples, &n_samples);
    if (status != BB_OK)
        return unexpected("bb_waveform", status);
    printf("wave %zu\n", n_samples);
    for (k = 0; k < n_samples; k++)
        printf("%.17g %.17g\n", t[k], v[k]);
    free(t);
    free(v);
    bb_close(design);
    return 0;
}

static int cmd_batch(const char *file, int n_variants, int n_paths, char **args)
{
    bb_handle design;
    const char **paths = malloc(sizeof(char *) * (size_t)n_paths);
    double *values = malloc(sizeof(double) * (size_t)n_paths * (size_t)n_variants);
    double *worst = malloc(sizeof(double) * (size_t)n_variants);
    int *passed = malloc(sizeof(int) * (size_t)n_variants);
    int status, i, p;

    if ((status = open_and_set(file, 0, NULL, &design)) != 0)
        return status;
    for (p = 0; p < n_paths; p++) {
        double lo = strtod(args[3 * p + 1], NULL), hi = strtod(args[3 * p + 2], NULL);
        paths[p] = args[3 * p];
        for (i = 0; i < n_variants; i++) {
            values[i * n_paths + p] = lo + (hi - lo) * i / (n_variants > 1 ? n_variants - 1 : 1);
            printf("value %d %s %.17g\n", i, paths[p], values[i * n_paths + p]);
        }
    }
    status = bb_batch(design, (size_t)n_paths, paths, (size_t)n_variants, values, worst, passed);
    if (status != BB_OK && status != BB_FAIL)
        return unexpected("bb_batch", status);
    printf("batch %d\n", status);
    for (i = 0; i < n_variants; i++)
        printf("variant %d %.17g %d\n", i, worst[i], passed[i]);
    bb_close(design);
    free(paths);
    free(values);
    free(worst);
    free(passed);
    return 0;
}

/* ---- API version 3: tolerance box, reset, judge, log (doubles printed with %a) ---- */

static int print_params(bb_handle design, const char *tag)
{
    int n_params, i, status;
    char name[256];
    double value;
    if ((status = bb_param_count(design, &n_params)) != BB_OK)
        return unexpected("bb_param_count", status);
    for (i = 0; i < n_params; i++) {
        if ((status = bb_param_name(design, i, name, sizeof name)) != BB_OK)
            return unexpected("bb_param_name", status);
        if ((status = bb_get(design, name, &value)) != BB_OK)
            return unexpected("bb_get", status);
        printf("%s %s %a\n", tag, name, value);
    }
    return 0;
}

static int cmd_rig(const char *file, const char *log, const char *serial, int n, char **args)
{
    bb_handle design;
    bb_result r;
    int status, count = -1, i;
    char name[256];

    if ((status = bb_open_file(file, &design)) != BB_OK)
        return status == BB_NOT_STARTED ? not_started("bb_open_file") : unexpected("bb_open_file", status);
    if ((status = bb_tolerance_count(design, &count)) != BB_OK)
        return unexpected("bb_tolerance_count", status);
    printf("tolerance-count %d\n", count);
    for (i = 0; i < count; i++) {
        double lo = 0, hi = 0;
        if ((status = bb_tolerance(design, i, name, sizeof name, &lo, &hi)) != BB_OK)
            return unexpected("bb_tolerance", status);
        printf("tolerance %s %a %a\n", name, lo, hi);
    }
    bb_close(design);
    if ((status = open_and_set(file, n, args, &design)) != 0)
        return status;
    status = bb_check(design, &r);
    if (status != BB_OK && status != BB_FAIL)
        return unexpected("bb_check", status);
    printf("check-set %d %a\n", status, r.worst_margin);
    if ((status = bb_log(design, log, serial)) != BB_OK)
        return unexpected("bb_log", status);
    printf("log %d\n", status);
    if ((status = bb_reset(design)) != BB_OK)
        return unexpected("bb_reset", status);
    printf("reset %d\n", status);
    if ((status = print_params(design, "reset-param")) != 0)
        return status;
    /* after a reset the handle has no check to record */
    status = bb_log(design, log, serial);
    printf("log-after-reset %d\n", status);
    status = bb_check(design, &r);
    if (status != BB_OK && status != BB_FAIL)
        return unexpected("bb_check", status);
    printf("check-reset %d %a %d %d %d\n", status, r.worst_margin, r.driver, r.receiver, r.edge);
    bb_close(design);
    return 0;
}

static int cmd_judge(int argc, char **argv)
{
    /* DESIGN DRIVER EDGE RECEIVER GUARDBAND T_EDGE CAPTURE LOG SERIAL [PATH=VALUE ...] */
    bb_handle design;
    bb_judgement j;
    size_t n = 0, cap = 1024;
    double *t = malloc(sizeof(double) * cap), *v = malloc(sizeof(double) * cap), a, b;
    double guardband = strtod(argv[4], NULL), t_edge = strtod(argv[5], NULL);
    int status, edge = strcmp(argv[2], "rise") == 0 ? BB_RISE : BB_FALL;
    FILE *f = fopen(argv[6], "r");

    if (f == NULL) {
        printf("cannot open %s\n", argv[6]);
        return 1;
    }
    while (fscanf(f, "%la %la", &a, &b) == 2) {
        if (n == cap) {
            cap *= 2;
            t = realloc(t, sizeof(double) * cap);
            v = realloc(v, sizeof(double) * cap);
        }
        t[n] = a;
        v[n++] = b;
    }
    fclose(f);
    if ((status = open_and_set(argv[0], argc - 9, argv + 9, &design)) != 0)
        return status;
    memset(&j, 0xA5, sizeof j);   /* every field must be written */
    status = bb_judge(design, argv[1], edge, argv[3], t, v, n, guardband, t_edge, &j);
    if (status != BB_OK && status != BB_FAIL)
        return unexpected("bb_judge", status);
    printf("judge %d %zu\n", status, n);
    printf("ints %d %d %d %d\n", j.passed, j.violations, j.limit, j.monotonic);
    printf("margin %a\nheadroom %a\nv_lo %a\nv_hi %a\novershoot %a\nundershoot %a\nringback %a\n",
           j.margin, j.headroom, j.v_lo, j.v_hi, j.overshoot, j.undershoot, j.ringback);
    printf("v_peak %a\nv_trough %a\nt_switch %a\nt_valid %a\nsettle_time %a\nflight_min %a\nflight_max %a\n",
           j.v_peak, j.v_trough, j.t_switch, j.t_valid, j.settle_time, j.flight_min, j.flight_max);
    printf("offset %a\nnoise_sigma %a\nhysteresis %a\n", j.offset, j.noise_sigma, j.hysteresis);
    if ((status = bb_log(design, argv[7], argv[8])) != BB_OK)
        return unexpected("bb_log", status);
    printf("log %d\n", status);
    bb_close(design);
    free(t);
    free(v);
    return 0;
}

struct log_job {
    const char *file, *log;
    int index, records, status;
};

static void *log_thread(void *arg)
{
    struct log_job *job = arg;
    bb_handle h;
    bb_result r;
    char serial[32];
    int k, status;
    snprintf(serial, sizeof serial, "T%d", job->index);
    job->status = 0;
    if ((status = bb_open_file(job->file, &h)) != BB_OK || (status = bb_set(h, "lines.route.z0", 44.0 + job->index))
        != BB_OK || ((status = bb_check(h, &r)) != BB_OK && status != BB_FAIL)) {
        job->status = status;
        return NULL;
    }
    for (k = 0; k < job->records; k++)
        if ((status = bb_log(h, job->log, serial)) != BB_OK)
            job->status = status;
    bb_close(h);
    return NULL;
}

static int cmd_logthreads(const char *file, const char *log, int n_threads, int records)
{
    pthread_t tid[16];
    struct log_job jobs[16];
    int i, bad = 0;
    if (n_threads < 1 || n_threads > 16)
        return 2;
    for (i = 0; i < n_threads; i++) {
        jobs[i].file = file;
        jobs[i].log = log;
        jobs[i].index = i;
        jobs[i].records = records;
        pthread_create(&tid[i], NULL, log_thread, &jobs[i]);
    }
    for (i = 0; i < n_threads; i++) {
        pthread_join(tid[i], NULL);
        printf("thread %d %d\n", i, jobs[i].status);
        bad |= jobs[i].status != 0;
    }
    return bad ? 1 : 0;
}

/* ---- bad input: one line per case, "case NAME STATUS MESSAGE" ---- */

static void report(const char *name, int status)
{
    char message[BB_ERROR_SIZE];
    bb_last_error(message, sizeof message);
    printf("case %s %d %s\n", name, status, message);
}

static int cmd_errors(const char *file, const char *bad_file)
{
    bb_handle h, closed;
    bb_result r;
    int status;
    double value, margins[64], t[16], v[16];
    size_t n_samples;
    char small[2], message[BB_ERROR_SIZE];
    const char *one_path[] = {"lines.route.z0"};
    const char *two_paths[] = {"lines.route.z0", "lines.route.z0"};
    const char *unknown_path[] = {"lines.route.zz"};
    const char *null_entry[] = {NULL};
    double one_value[] = {45.0};
    double nan_values[] = {45.0, NAN};
    double negative_values[] = {45.0, -45.0};
    double worst[2];

    if ((status = bb_open_file(file, &h)) != BB_OK)
        return status == BB_NOT_STARTED ? not_started("bb_open_file") : unexpected("bb_open_file", status);

    report("open_file_null_path", bb_open_file(NULL, &h));
    report("open_file_null_handle", bb_open_file(file, NULL));
    report("open_file_missing", bb_open_file("/nonexistent/board.toml", &closed));
    report("open_file_nonphysical", bb_open_file(bad_file, &closed));
    report("open_text_null", bb_open_text(NULL, &closed));
    report("open_text_not_toml", bb_open_text("[bus\nname = ", &closed));
    report("open_text_incomplete", bb_open_text("[bus]\nname = \"x\"\n", &closed));
    report("open_text_not_utf8", bb_open_text("\xff\xfe[bus]", &closed));

    bb_open_file(file, &closed);
    bb_close(closed);
    report("close_twice", bb_close(closed));
    report("close_never_opened", bb_close(987654));
    report("set_after_close", bb_set(closed, "lines.route.z0", 45.0));
    report("check_handle_zero", bb_check(0, &r));

    report("set_null_path", bb_set(h, NULL, 45.0));
    report("set_unknown_path", bb_set(h, "lines.route.zz", 45.0));
    report("set_nan", bb_set(h, "lines.route.z0", NAN));
    report("set_infinite", bb_set(h, "lines.route.z0", INFINITY));
    report("set_negative_z0", bb_set(h, "lines.route.z0", -45.0));
    report("set_zero_length", bb_set(h, "segment.0.length", 0.0));
    report("get_unknown_path", bb_get(h, "parts.nobody.c_pin", &value));
    report("get_null_value", bb_get(h, "lines.route.z0", NULL));
    report("param_count_null", bb_param_count(h, NULL));
    report("param_name_out_of_range", bb_param_name(h, 100000, message, sizeof message));
    report("param_name_small_buffer", bb_param_name(h, 0, small, sizeof small));
    report("tap_count_null", bb_tap_count(h, NULL));
    report("tap_name_negative_index", bb_tap_name(h, -1, message, sizeof message));
    report("tap_name_null_buffer", bb_tap_name(h, 0, NULL, 16));
    report("check_null_result", bb_check(h, NULL));
    report("receiver_margins_null", bb_receiver_margins(h, NULL, 4));
    report("receiver_margins_wrong_count", bb_receiver_margins(h, margins, 3));
    report("margin_table_wrong_count", bb_margin_table(h, margins, 4));
    report("out_of_box_count_null", bb_out_of_box_count(h, NULL));
    report("out_of_box_null_path", bb_out_of_box(h, 0, NULL, 16, NULL, NULL, NULL));
    report("out_of_box_index_out_of_range", bb_out_of_box(h, 0, message, sizeof message, NULL, NULL, NULL));

    report("waveform_null_n_samples", bb_waveform(h, "CTRL", BB_RISE, "MEM1", NULL, NULL, 0, NULL));
    report("waveform_null_driver", bb_waveform(h, NULL, BB_RISE, "MEM1", NULL, NULL, 0, &n_samples));
    report("waveform_null_arrays", bb_waveform(h, "CTRL", BB_RISE, "MEM1", NULL, NULL, 16, &n_samples));
    report("waveform_unknown_driver", bb_waveform(h, "U99", BB_RISE, "MEM1", NULL, NULL, 0, &n_samples));
    report("waveform_receiver_cannot_drive",
           bb_waveform(h, "MEM1", BB_RISE, "MEM2", NULL, NULL, 0, &n_samples));
    report("waveform_bad_edge", bb_waveform(h, "CTRL", 7, "MEM1", NULL, NULL, 0, &n_samples));
    report("waveform_unknown_tap", bb_waveform(h, "CTRL", BB_RISE, "MEM9", NULL, NULL, 0, &n_samples));
    report("waveform_small_capacity", bb_waveform(h, "CTRL", BB_RISE, "MEM1", t, v, 16, &n_samples));

    report("batch_null_paths", bb_batch(h, 1, NULL, 1, one_value, worst, NULL));
    report("batch_null_path_entry", bb_batch(h, 1, null_entry, 1, one_value, worst, NULL));
    report("batch_null_values", bb_batch(h, 1, one_path, 1, NULL, worst, NULL));
    report("batch_null_worst", bb_batch(h, 1, one_path, 1, one_value, NULL, NULL));
    report("batch_zero_paths", bb_batch(h, 0, one_path, 1, one_value, worst, NULL));
    report("batch_zero_variants", bb_batch(h, 1, one_path, 0, one_value, worst, NULL));
    report("batch_unknown_path", bb_batch(h, 1, unknown_path, 1, one_value, worst, NULL));
    report("batch_duplicate_path", bb_batch(h, 2, two_paths, 1, one_value, worst, NULL));
    report("batch_nan_value", bb_batch(h, 1, one_path, 2, nan_values, worst, NULL));
    report("batch_negative_z0", bb_batch(h, 1, one_path, 2, negative_values, worst, NULL));

    report("version_small_text", bb_version(NULL, small, sizeof small));
    report("runtime_info_null", bb_runtime_info(NULL, 64));
    report("runtime_info_small", bb_runtime_info(small, sizeof small));
    bb_set(h, "lines.route.zz", 1.0);   /* leaves a long message behind */
    status = bb_last_error(small, sizeof small);
    printf("case last_error_small_buffer %d %s\n", status, small);
    printf("case last_error_null %d -\n", bb_last_error(NULL, 16));

    /* absurd but finite values are refused before they reach the numerics */
    report("set_implausible_c_pin", bb_set(h, "parts.mem_load.c_pin", 3.1));
    report("set_huge_c_pin", bb_set(h, "parts.mem_load.c_pin", 1e300));
    report("set_text_null_path", bb_set_text(h, NULL, "40 ohm"));
    report("set_text_null_value", bb_set_text(h, "lines.route.z0", NULL));
    report("set_text_unknown_path", bb_set_text(h, "lines.route.zz", "40 ohm"));
    report("set_text_wrong_unit", bb_set_text(h, "lines.route.z0", "40 pF"));
    report("set_text_ambiguous_unit", bb_set_text(h, "parts.mem_load.v_max", "3 mv"));
    report("set_text_expression", bb_set_text(h, "lines.route.z0", "9**9**9 ohm"));
    report("set_text_implausible", bb_set_text(h, "parts.mem_load.l_pkg", "2 H"));

    /* a failed bb_set leaves the design as it was */
    bb_set(h, "parts.mem_load.c_pin", 2e-12);
    bb_set(h, "lines.route.z0", -1.0);
    bb_get(h, "lines.route.z0", &value);
    printf("unchanged lines.route.z0 %.17g\n", value);
    status = bb_get(h, "lines.route.z0", &value);
    report("success_keeps_message", status);   /* still the failed bb_set's message */

    /* ---- API version 3 ---- */
    {
        double lo, hi, tt[8], vv[8], sentinel[4];
        int passed_sentinel[4], k, untouched;
        bb_judgement j;
        bb_handle fresh;
        size_t huge_counts[] = {(size_t)10000001, (size_t)-1};
        for (k = 0; k < 8; k++) {
            tt[k] = 1e-9 * k;
            vv[k] = 0.0;
        }
        report("tolerance_count_null", bb_tolerance_count(h, NULL));
        report("tolerance_null_path", bb_tolerance(h, 0, NULL, 16, &lo, &hi));
        report("tolerance_index_out_of_range", bb_tolerance(h, 99, message, sizeof message, &lo, &hi));
        report("tolerance_small_buffer", bb_tolerance(h, 0, small, sizeof small, &lo, &hi));
        report("reset_closed_handle", bb_reset(closed));
        bb_open_file(file, &fresh);
        report("log_nothing_yet", bb_log(fresh, "/nonexistent-dir/bench.jsonl", "SN-1"));
        bb_check(fresh, &r);
        report("log_null_path", bb_log(fresh, NULL, "SN-1"));
        report("log_null_serial", bb_log(fresh, "/dev/null", NULL));
        report("log_empty_serial", bb_log(fresh, "/dev/null", ""));
        report("log_serial_control_character", bb_log(fresh, "/dev/null", "SN\n1"));
        report("log_directory", bb_log(fresh, "/", "SN-1"));
        report("log_cannot_open", bb_log(fresh, "/nonexistent-dir/bench.jsonl", "SN-1"));
        report("log_disk_full", bb_log(fresh, "/dev/full", "SN-1"));
        bb_reset(fresh);
        report("log_after_reset", bb_log(fresh, "/dev/null", "SN-1"));
        bb_close(fresh);
        report("judge_null_driver", bb_judge(h, NULL, BB_RISE, "MEM1", tt, vv, 8, 0.0, NAN, &j));
        report("judge_null_receiver", bb_judge(h, "CTRL", BB_RISE, NULL, tt, vv, 8, 0.0, NAN, &j));
        report("judge_null_t", bb_judge(h, "CTRL", BB_RISE, "MEM1", NULL, vv, 8, 0.0, NAN, &j));
        report("judge_null_result", bb_judge(h, "CTRL", BB_RISE, "MEM1", tt, vv, 8, 0.0, NAN, NULL));
        report("judge_one_sample", bb_judge(h, "CTRL", BB_RISE, "MEM1", tt, vv, 1, 0.0, NAN, &j));
        report("judge_huge_count", bb_judge(h, "CTRL", BB_RISE, "MEM1", tt, vv, (size_t)-1, 0.0, NAN, &j));
        report("judge_unknown_receiver", bb_judge(h, "CTRL", BB_RISE, "MEM9", tt, vv, 8, 0.0, NAN, &j));
        report("judge_receiver_is_driver", bb_judge(h, "CTRL", BB_RISE, "CTRL", tt, vv, 8, 0.0, NAN, &j));
        report("judge_driver_cannot_drive", bb_judge(h, "MEM2", BB_RISE, "MEM1", tt, vv, 8, 0.0, NAN, &j));
        report("judge_bad_edge", bb_judge(h, "CTRL", 5, "MEM1", tt, vv, 8, 0.0, NAN, &j));
        report("judge_negative_guardband", bb_judge(h, "CTRL", BB_RISE, "MEM1", tt, vv, 8, -0.01, NAN, &j));
        report("judge_infinite_t_edge", bb_judge(h, "CTRL", BB_RISE, "MEM1", tt, vv, 8, 0.0, INFINITY, &j));
        report("judge_misses_edge", bb_judge(h, "CTRL", BB_RISE, "MEM1", tt, vv, 8, 0.0, NAN, &j));
        vv[3] = NAN;
        report("judge_nan_sample", bb_judge(h, "CTRL", BB_RISE, "MEM1", tt, vv, 8, 0.0, NAN, &j));
        vv[3] = 0.0;
        tt[4] = tt[3];
        report("judge_time_repeated", bb_judge(h, "CTRL", BB_RISE, "MEM1", tt, vv, 8, 0.0, NAN, &j));
        tt[4] = 4e-9;
        for (k = 0; k < 8; k++)
            vv[k] = k < 7 ? 0.0 : 2.5;   /* the edge in the last sample: the record ends before it settles */
        report("judge_window_cuts_edge", bb_judge(h, "CTRL", BB_RISE, "MEM1", tt, vv, 8, 0.0, NAN, &j));

        /* bb_batch: an impossible count is refused before the caller's buffers are touched */
        for (k = 0; k < 2; k++) {
            int i;
            for (i = 0; i < 4; i++) {
                sentinel[i] = -1234.5;
                passed_sentinel[i] = 77;
            }
            status = bb_batch(h, 1, one_path, huge_counts[k], one_value, sentinel, passed_sentinel);
            untouched = 1;
            for (i = 0; i < 4; i++)
                untouched &= sentinel[i] == -1234.5 && passed_sentinel[i] == 77;
            report(k == 0 ? "batch_too_many_variants" : "batch_size_max_variants", status);
            printf("untouched %s %d\n", k == 0 ? "batch_too_many_variants" : "batch_size_max_variants",
                   untouched);
        }
        {
            const char *many[1000];
            int i;
            for (i = 0; i < 1000; i++)
                many[i] = "lines.route.z0";
            for (i = 0; i < 4; i++)
                sentinel[i] = -1234.5;
            status = bb_batch(h, 1000, many, 1, one_value, sentinel, NULL);
            untouched = 1;
            for (i = 0; i < 4; i++)
                untouched &= sentinel[i] == -1234.5;
            report("batch_too_many_paths", status);
            printf("untouched batch_too_many_paths %d\n", untouched);
        }
    }
    bb_close(h);
    return 0;
}

int main(int argc, char **argv)
{
    if (argc >= 2 && strcmp(argv[1], "init") == 0)
        return cmd_init();
    if (argc >= 3 && strcmp(argv[1], "check") == 0)
        return cmd_check(argv[2], argc - 3, argv + 3);
    if (argc >= 6 && strcmp(argv[1], "wave") == 0)
        return cmd_wave(argv[2], argv[3], argv[4], argv[5], argc - 6, argv + 6);
    if (argc >= 7 && strcmp(argv[1], "batch") == 0 && (argc - 4) % 3 == 0)
        return cmd_batch(argv[2], atoi(argv[3]), (argc - 4) / 3, argv + 4);
    if (argc == 4 && strcmp(argv[1], "errors") == 0)
        return cmd_errors(argv[2], argv[3]);
    if (argc >= 5 && strcmp(argv[1], "rig") == 0)
        return cmd_rig(argv[2], argv[3], argv[4], argc - 5, argv + 5);
    if (argc == 6 && strcmp(argv[1], "logthreads") == 0)
        return cmd_logthreads(argv[2], argv[3], atoi(argv[4]), atoi(argv[5]));
    if (argc >= 11 && strcmp(argv[1], "judge") == 0)
        return cmd_judge(argc - 2, argv + 2);
    fprintf(stderr, "usage: see the comment at the top of api_probe.c\n");
    return 2;
}
