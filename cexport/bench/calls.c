/*
 * calls.c -- timing driver for benchmarks/c_overhead.py (not a test).
 *
 *   calls DESIGN N_CHECKS N_VARIANTS
 *
 * DESIGN is the short-bus example (line "route", driver part "hub_ctrl").
 * Prints, in seconds from the start of main():
 *   first_runtime  the first call (bb_version): interpreter start + imports
 *   first_check    bb_open_file + the first bb_check (kernel cache load)
 * then the median time of N_CHECKS calls of bb_set + bb_check, one bb_batch of
 * N_VARIANTS variants, the median time of N_CHECKS bb_judge calls on the
 * simulated CTRL rise edge at MEM3 (from bb_waveform), and checksums the
 * Python side compares with.
 * N_CHECKS = 0: stop after the first check.
 */
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <time.h>

#include "busbudget.h"

static double now(void)
{
    struct timespec ts;
    clock_gettime(CLOCK_MONOTONIC, &ts);
    return (double)ts.tv_sec + 1e-9 * (double)ts.tv_nsec;
}

static int by_value(const void *a, const void *b)
{
    double x = *(const double *)a, y = *(const double *)b;
    return (x > y) - (x < y);
}

/* the workload, shared with the Python side of the benchmark */
static double check_z0(int i) { return 44.0 + 0.01 * (i % 100); }
static double batch_z0(int i, int n) { return 40.0 + 10.0 * i / (n - 1); }
static double batch_r(int i, int n) { return 14.0 + 10.0 * ((i * 7919) % n) / (n - 1); }

int main(int argc, char **argv)
{
    double t0 = now(), t, sum = 0.0, *values, *worst, *per_call;
    const char *paths[] = {"lines.route.z0", "parts.hub_ctrl.r_high"};
    int n_checks, n_variants, i, status, api;
    bb_handle h;
    bb_result r;

    if (argc != 4) {
        fprintf(stderr, "usage: %s DESIGN N_CHECKS N_VARIANTS\n", argv[0]);
        return 2;
    }
    n_checks = atoi(argv[2]);
    n_variants = atoi(argv[3]);

    if ((status = bb_version(&api, NULL, 0)) != BB_OK) {
        fprintf(stderr, "bb_version: status %d\n", status);
        return 1;
    }
    printf("first_runtime %.6f\n", now() - t0);
    if ((status = bb_open_file(argv[1], &h)) != BB_OK)
        return 1;
    status = bb_check(h, &r);
    if (status != BB_OK && status != BB_FAIL)
        return 1;
    printf("first_check %.6f\n", now() - t0);

    if (n_checks <= 0 || n_variants < 2) {   /* first-call measurement only */
        bb_close(h);
        return 0;
    }
    per_call = malloc(sizeof(double) * (size_t)n_checks);
    for (i = 0; i < n_checks; i++) {
        t = now();
        bb_set(h, "lines.route.z0", check_z0(i));
        status = bb_check(h, &r);
        per_call[i] = now() - t;
        if (status != BB_OK && status != BB_FAIL)
            return 1;
        sum += r.worst_margin;
    }
    qsort(per_call, (size_t)n_checks, sizeof(double), by_value);
    printf("check_median %.9f\n", per_call[n_checks / 2]);
    printf("check_checksum %.17g\n", sum);
    free(per_call);

    bb_set(h, "lines.route.z0", 45.0);
    values = malloc(sizeof(double) * 2 * (size_t)n_variants);
    worst = malloc(sizeof(double) * (size_t)n_variants);
    for (i = 0; i < n_variants; i++) {
        values[2 * i] = batch_z0(i, n_variants);
        values[2 * i + 1] = batch_r(i, n_variants);
    }
    t = now();
    status = bb_batch(h, 2, paths, (size_t)n_variants, values, worst, NULL);
    printf("batch_seconds %.6f\n", now() - t);
    if (status != BB_OK && status != BB_FAIL)
        return 1;
    for (sum = 0.0, i = 0; i < n_variants; i++)
        sum += worst[i];
    printf("batch_checksum %.17g\n", sum);
    free(values);
    free(worst);

    {   /* bb_judge on the engine's own waveform, as a bench capture would arrive */
        size_t n = 0;
        double *tw, *vw;
        bb_judgement j;
        if (bb_waveform(h, "CTRL", BB_RISE, "MEM3", NULL, NULL, 0, &n) != BB_OK)
            return 1;
        tw = malloc(sizeof(double) * n);
        vw = malloc(sizeof(double) * n);
        if (bb_waveform(h, "CTRL", BB_RISE, "MEM3", tw, vw, n, &n) != BB_OK)
            return 1;
        per_call = malloc(sizeof(double) * (size_t)n_checks);
        for (sum = 0.0, i = 0; i < n_checks; i++) {
            t = now();
            status = bb_judge(h, "CTRL", BB_RISE, "MEM3", tw, vw, n, 0.0, NAN, &j);
            per_call[i] = now() - t;
            if (status != BB_OK && status != BB_FAIL)
                return 1;
            sum += j.margin;
        }
        qsort(per_call, (size_t)n_checks, sizeof(double), by_value);
        printf("judge_median %.9f\n", per_call[n_checks / 2]);
        printf("judge_checksum %.17g\n", sum);
        printf("judge_samples %zu\n", n);
        free(per_call);
        free(tw);
        free(vw);
    }
    bb_close(h);
    return 0;
}
