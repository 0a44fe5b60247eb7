/*
 * threads.c -- calls libbusbudget from several pthreads at once and checks
 * that every result equals, bit for bit, the same computation done one call
 * at a time afterwards; also that each thread's error message is its own.
 *
 *   threads DESIGN      (the short-bus example: taps CTRL, MEM1..MEM3, line "route")
 *
 * The threads start before any other call, so they also race through the
 * start-up of the embedded runtime.  Prints one "ref" line per computation
 * (for tests/test_cexport.py to compare with the Python API) and a summary:
 *   summary THREADS ITERATIONS MISMATCHES ERROR_MISMATCHES
 * Exit status: 0 all equal, 1 a mismatch or an unexpected status, 3 the
 * runtime did not start.
 */
#include <pthread.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "busbudget.h"

#define THREADS 4
#define ITERATIONS 3
#define BATCH 4

static const char *design_file;
static bb_handle shared;
static pthread_once_t shared_once = PTHREAD_ONCE_INIT;
static int shared_status;
static pthread_barrier_t barrier;   /* lines the threads up around their error calls */

struct work {
    int index;
    int status;                     /* 0 ok, else the first bad status seen */
    double worst[ITERATIONS];       /* own handle, z0 = z0_of(index, it) */
    double shared_worst[ITERATIONS];
    double wave_sum;                /* sum of the pin waveform on the shared handle */
    size_t wave_n;
    double batch_worst[BATCH];
    int error_mismatches;
};

static double z0_of(int index, int it) { return 40.0 + index + 0.5 * it; }
static double batch_z0(int index, int i) { return 41.0 + index + 2.0 * i; }
static const char *wave_tap(int index) { return index % 3 == 0 ? "MEM1" : index % 3 == 1 ? "MEM2" : "MEM3"; }

static void open_shared(void) { shared_status = bb_open_file(design_file, &shared); }

static void bad(struct work *w, int status)
{
    if (w->status == 0)
        w->status = status == 0 ? -100 : status;   /* -100: the runtime did not start */
}

/* sum of v over the waveform of `tap` (CTRL driving a rising edge) */
static int wave_sum(bb_handle h, const char *tap, double *sum, size_t *n)
{
    double *t, *v;
    size_t k;
    int status = bb_waveform(h, "CTRL", BB_RISE, tap, NULL, NULL, 0, n);
    if (status != BB_OK)
        return status;
    t = malloc(sizeof(double) * *n);
    v = malloc(sizeof(double) * *n);
    status = bb_waveform(h, "CTRL", BB_RISE, tap, t, v, *n, n);
    *sum = 0.0;
    for (k = 0; status == BB_OK && k < *n; k++)
        *sum += v[k];
    free(t);
    free(v);
    return status;
}

static int batch_run(bb_handle h, int index, double *worst)
{
    const char *paths[] = {"lines.route.z0"};
    double values[BATCH];
    int i, status;
    for (i = 0; i < BATCH; i++)
        values[i] = batch_z0(index, i);
    status = bb_batch(h, 1, paths, BATCH, values, worst, NULL);
    return status == BB_FAIL ? BB_OK : status;
}

static void *run(void *arg)
{
    struct work *w = arg;
    bb_handle own = 0;
    bb_result r;
    char wrong_path[64], message[BB_ERROR_SIZE];
    int it, status;

    if ((status = bb_open_file(design_file, &own)) != BB_OK)
        bad(w, status);
    pthread_once(&shared_once, open_shared);
    if (shared_status != BB_OK)
        bad(w, shared_status);

    /* after a failure a thread still walks through the barriers, so no other waits forever */
    for (it = 0; it < ITERATIONS; it++) {
        if (w->status == 0 && (status = bb_set(own, "lines.route.z0", z0_of(w->index, it))) != BB_OK)
            bad(w, status);
        if (w->status == 0) {
            status = bb_check(own, &r);
            if (status != BB_OK && status != BB_FAIL)
                bad(w, status);
            w->worst[it] = r.worst_margin;
        }
        if (w->status == 0) {
            status = bb_check(shared, &r);
            if (status != BB_OK && status != BB_FAIL)
                bad(w, status);
            w->shared_worst[it] = r.worst_margin;
        }

        /* every thread fails a call, then every thread reads its message back:
           with one message for all threads, all but one would read a wrong one */
        snprintf(wrong_path, sizeof wrong_path, "no.such.path.thread%d", w->index);
        status = bb_set(own, wrong_path, 1.0);
        pthread_barrier_wait(&barrier);
        bb_last_error(message, sizeof message);
        if (status != BB_ERR_PATH || strstr(message, wrong_path) == NULL)
            w->error_mismatches++;
        pthread_barrier_wait(&barrier);
    }
    if (w->status == 0 && (status = wave_sum(shared, wave_tap(w->index), &w->wave_sum, &w->wave_n)) != BB_OK)
        bad(w, status);
    if (w->status == 0 && (status = batch_run(own, w->index, w->batch_worst)) != BB_OK)
        bad(w, status);
    bb_close(own);
    return NULL;
}

int main(int argc, char **argv)
{
    pthread_t tid[THREADS];
    struct work work[THREADS];
    bb_handle h;
    bb_result r;
    int i, it, status, mismatches = 0, error_mismatches = 0;

    if (argc != 2) {
        fprintf(stderr, "usage: %s DESIGN\n", argv[0]);
        return 2;
    }
    design_file = argv[1];
    memset(work, 0, sizeof work);
    pthread_barrier_init(&barrier, NULL, THREADS);
    for (i = 0; i < THREADS; i++) {
        work[i].index = i;
        pthread_create(&tid[i], NULL, run, &work[i]);
    }
    for (i = 0; i < THREADS; i++)
        pthread_join(tid[i], NULL);
    for (i = 0; i < THREADS; i++) {
        if (work[i].status == -100) {
            printf("not-started thread %d\n", i);
            return 3;
        }
        if (work[i].status != 0) {
            printf("unexpected thread %d status %d\n", i, work[i].status);
            return 1;
        }
    }

    /* the same computations, one at a time */
    if ((status = bb_open_file(design_file, &h)) != BB_OK)
        return 1;
    status = bb_check(shared, &r);
    for (i = 0; i < THREADS; i++) {
        double sum, batch_worst[BATCH];
        size_t n;
        for (it = 0; it < ITERATIONS; it++) {
            double ref;
            bb_set(h, "lines.route.z0", z0_of(i, it));
            bb_check(h, &r);
            ref = r.worst_margin;
            printf("ref %d %d %.17g %.17g\n", i, it, z0_of(i, it), ref);
            mismatches += work[i].worst[it] != ref;
            bb_check(shared, &r);
            mismatches += work[i].shared_worst[it] != r.worst_margin;
        }
        wave_sum(shared, wave_tap(i), &sum, &n);
        mismatches += sum != work[i].wave_sum || n != work[i].wave_n;
        batch_run(h, i, batch_worst);
        for (it = 0; it < BATCH; it++) {
            printf("batch %d %d %.17g %.17g\n", i, it, batch_z0(i, it), batch_worst[it]);
            mismatches += batch_worst[it] != work[i].batch_worst[it];
        }
        error_mismatches += work[i].error_mismatches;
    }
    bb_check(shared, &r);
    printf("shared %.17g\n", r.worst_margin);
    printf("summary %d %d %d %d\n", THREADS, ITERATIONS, mismatches, error_mismatches);
    bb_close(h);
    bb_close(shared);
    return mismatches == 0 && error_mismatches == 0 ? 0 : 1;
}
