/*
 * rig_unit.c -- one unit on a production test rig, with the API version 3 calls:
 * show the tolerance box, apply the unit's measured values, run the budget
 * check, judge one captured edge, append both records to the bench log, and
 * reset the handle for the next unit.
 *
 *   rig_unit DESIGN LOG SERIAL CAPTURE DRIVER rise|fall RECEIVER [PATH=VALUE ...]
 *
 * CAPTURE: two numbers per line, time [s] and the receiver pin's voltage [V]
 * (what a scope script dumps; any time origin).  PATH=VALUE: measured values,
 * with units ("lines.route.z0=47.6 ohm") or SI numbers.
 * Exit status: 0 check and capture pass, 1 either fails, 2 bad input or no
 * runtime.
 *
 * Build:  cc rig_unit.c $(pkg-config --cflags --libs busbudget) -o rig_unit
 *
 * The verdicts are engineering estimates from a linear model: confirm them by
 * measurement and with the part makers' data; the applicable standards and the
 * responsible engineer decide.
 */
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "busbudget.h"

static int fail(const char *what, int status)
{
    char message[BB_ERROR_SIZE];
    bb_last_error(message, sizeof message);
    fprintf(stderr, "rig_unit: %s: status %d: %s\n", what, status, message);
    return 2;
}

/* Reads "t v" pairs from path into freshly allocated arrays; returns the count (0 on error). */
static size_t read_capture(const char *path, double **t, double **v)
{
    size_t n = 0, cap = 4096;
    double a, b;
    FILE *f = fopen(path, "r");
    if (f == NULL)
        return 0;
    *t = malloc(cap * sizeof **t);
    *v = malloc(cap * sizeof **v);
    while (fscanf(f, "%lf%*[ ,\t]%lf", &a, &b) == 2) {
        if (n == cap) {
            cap *= 2;
            *t = realloc(*t, cap * sizeof **t);
            *v = realloc(*v, cap * sizeof **v);
        }
        (*t)[n] = a;
        (*v)[n++] = b;
    }
    fclose(f);
    return n;
}

int main(int argc, char **argv)
{
    bb_handle design;
    bb_result check;
    bb_judgement edge;
    int status, i, count = 0, exit_code = 0;
    double *t = NULL, *v = NULL, lo, hi;
    size_t n;
    char path[256];

    if (argc < 8) {
        fprintf(stderr, "usage: rig_unit DESIGN LOG SERIAL CAPTURE DRIVER rise|fall RECEIVER [PATH=VALUE ...]\n");
        return 2;
    }
    if ((status = bb_version(NULL, NULL, 0)) != BB_OK)
        return fail("the busbudget runtime did not start", status);
    if ((status = bb_open_file(argv[1], &design)) != BB_OK)
        return fail(argv[1], status);

    bb_tolerance_count(design, &count);               /* what the design was signed off for */
    for (i = 0; i < count && bb_tolerance(design, i, path, sizeof path, &lo, &hi) == BB_OK; i++)
        printf("tolerance box: %s %g .. %g\n", path, lo, hi);

    for (i = 8; i < argc; i++) {                      /* this unit's measured values */
        char *eq = strchr(argv[i], '='), *end;
        double number;
        if (eq == NULL) {
            fprintf(stderr, "rig_unit: %s: expected PATH=VALUE\n", argv[i]);
            return 2;
        }
        *eq = '\0';
        number = strtod(eq + 1, &end);
        if (end != eq + 1 && *end == '\0')           /* a plain number: SI base units */
            status = bb_set(design, argv[i], number);
        else                                          /* with its unit: "47.6 ohm" */
            status = bb_set_text(design, argv[i], eq + 1);
        if (status != BB_OK)
            return fail(argv[i], status);
    }

    status = bb_check(design, &check);
    if (status != BB_OK && status != BB_FAIL)
        return fail("bb_check", status);
    printf("budget check: %s, worst margin %.4f V (%s -> %s), %d value(s) outside the box\n",
           check.passed ? "PASS" : "FAIL", check.worst_margin, check.driver_name, check.receiver_name,
           check.n_out_of_box);
    exit_code |= status == BB_FAIL;
    if ((status = bb_log(design, argv[2], argv[3])) != BB_OK)
        return fail("bb_log (check)", status);

    if ((n = read_capture(argv[4], &t, &v)) == 0) {
        fprintf(stderr, "rig_unit: %s: cannot read the capture\n", argv[4]);
        return 2;
    }
    /* 10 mV guardband for the probe and scope; the driver's edge time is not known here */
    status = bb_judge(design, argv[5], strcmp(argv[6], "fall") == 0 ? BB_FALL : BB_RISE, argv[7], t, v, n,
                      0.010, NAN, &edge);
    free(t);
    free(v);
    if (status != BB_OK && status != BB_FAIL)
        return fail("bb_judge", status);
    printf("captured edge at %s: %s, margin %.4f V, overshoot %.4f V, noise %.1f mV rms\n", argv[7],
           edge.passed ? "PASS" : "FAIL", edge.margin, edge.overshoot, edge.noise_sigma * 1e3);
    exit_code |= status == BB_FAIL;
    if ((status = bb_log(design, argv[2], argv[3])) != BB_OK)
        return fail("bb_log (judge)", status);

    bb_reset(design);                                 /* nominal again, ready for the next unit */
    bb_close(design);
    printf("unit %s: %s (records appended to %s)\n", argv[3], exit_code ? "FAIL" : "PASS", argv[2]);
    return exit_code;
}
