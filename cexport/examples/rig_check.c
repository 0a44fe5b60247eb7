/*
 * rig_check.c -- what a production test rig does with libbusbudget: load the
 * board's design file, replace two nominal values with what the rig measured
 * on this unit, run the budget check, print the verdict, and exit non-zero
 * when the bus fails or anything goes wrong.
 *
 *   rig_check DESIGN.toml PATH=VALUE PATH=VALUE
 *   e.g. rig_check short_bus.toml lines.route.z0=47.9 parts.hub_ctrl.r_high=21.5
 *
 * Values are SI (ohm, m, F, ...).  In a real rig they come from the
 * instruments (TDR impedance, measured driver resistance...), not argv.
 * Exit status: 0 pass, 1 fail, 2 bad input or the library cannot start.
 *
 * Build: cc rig_check.c -IDIR -LDIR -lbusbudget -Wl,-rpath,DIR -o rig_check
 * (DIR: where cexport/build.py put libbusbudget.so and busbudget.h).
 */
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "busbudget.h"

/* Print what went wrong and return the "bad input" exit status. */
static int give_up(const char *what, int status)
{
    char message[BB_ERROR_SIZE];
    if (status == BB_NOT_STARTED) {
        /* cffi returns 0 when the embedded runtime could not start; the
           reason is on stderr.  Never read 0 as success. */
        fprintf(stderr, "rig_check: %s: the busbudget runtime did not start (see above)\n", what);
        return 2;
    }
    bb_last_error(message, sizeof message);
    fprintf(stderr, "rig_check: %s failed (status %d): %s\n", what, status, message);
    return 2;
}

/* Split "path=value" into the path (in place) and the value [SI]. */
static int parse_measurement(char *arg, const char **path, double *value)
{
    char *eq = strchr(arg, '='), *end;
    if (eq == NULL || eq == arg)
        return 0;
    *eq = '\0';
    *value = strtod(eq + 1, &end);
    *path = arg;
    return end != eq + 1 && *end == '\0';
}

int main(int argc, char **argv)
{
    bb_handle design;
    bb_result result;
    int status, i;

    if (argc != 4) {
        fprintf(stderr, "usage: %s DESIGN.toml PATH=VALUE PATH=VALUE\n", argv[0]);
        return 2;
    }
    status = bb_open_file(argv[1], &design);
    if (status != BB_OK)
        return give_up("opening the design", status);

    for (i = 2; i < 4; i++) {
        const char *path;
        double value;
        if (!parse_measurement(argv[i], &path, &value)) {
            fprintf(stderr, "rig_check: expected PATH=VALUE, got '%s'\n", argv[i]);
            bb_close(design);
            return 2;
        }
        status = bb_set(design, path, value);
        if (status != BB_OK) {
            int code = give_up("setting a measured value", status);   /* reads the message */
            bb_close(design);
            return code;
        }
        printf("measured %s = %g\n", path, value);
    }

    status = bb_check(design, &result);
    if (status != BB_OK && status != BB_FAIL) {
        int code = give_up("the budget check", status);
        bb_close(design);
        return code;
    }

    printf("verdict: %s\n", status == BB_OK ? "PASS" : "FAIL");
    printf("worst margin: %.4f V\n", result.worst_margin);
    printf("worst case: driver %s, receiver %s, %s edge, headroom %.4f V to its %s limit\n",
           result.driver_name, result.receiver_name, result.edge == BB_RISE ? "rising" : "falling",
           result.worst_headroom, result.worst_limit == BB_LIMIT_V_MAX ? "v_max"
                                  : result.worst_limit == BB_LIMIT_V_MIN ? "v_min" : "margin");
    printf("cases with a violation: %d of %d\n", result.n_failing, result.n_cases);
    /* a measured value outside the design's tolerance box: evaluated as given, but say so */
    for (i = 0; i < result.n_out_of_box; i++) {
        char path[256];
        double value, lo, hi;
        if (bb_out_of_box(design, i, path, sizeof path, &value, &lo, &hi) == BB_OK)
            printf("outside the tolerance box: %s = %g (box %g .. %g)\n", path, value, lo, hi);
    }
    bb_close(design);
    printf("(estimate from a linear model: confirm by measurement and with the part makers' data)\n");
    return status == BB_OK ? 0 : 1;
}
