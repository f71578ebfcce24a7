/*
 * cholmod_solve: factor and solve one symmetric positive definite system with
 * CHOLMOD (SuiteSparse, Debian's libsuitesparse-dev), the reference for the
 * side-by-side comparison in compare.py. It is a measuring tool only and is
 * never linked into trussmonitor.
 *
 * Usage: cholmod_solve MATRIX.mtx RHS.txt X_OUT.txt REPEAT [default|amd|metis]
 *
 * MATRIX.mtx is a MatrixMarket symmetric matrix (lower triangle), RHS.txt one
 * value per line. The system is analysed (ordering and symbolic
 * factorisation), factored and solved REPEAT times; the fastest time of each
 * step is kept. "default" is CHOLMOD's own choice (AMD, and METIS nested
 * dissection when AMD's fill is high); "amd" and "metis" force one ordering.
 * The solution is written to X_OUT.txt and one JSON object to stdout.
 */
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <time.h>
#include <suitesparse/cholmod.h>

static double now(void) {
    struct timespec ts;
    clock_gettime(CLOCK_MONOTONIC, &ts);
    return ts.tv_sec + 1e-9 * ts.tv_nsec;
}

int main(int argc, char **argv) {
    if (argc < 5) {
        fprintf(stderr, "usage: %s MATRIX.mtx RHS.txt X_OUT.txt REPEAT [default|amd|metis]\n", argv[0]);
        return 2;
    }
    int repeat = atoi(argv[4]);
    const char *ord = argc > 5 ? argv[5] : "default";
    cholmod_common c;
    cholmod_start(&c);
    if (strcmp(ord, "amd") == 0) {
        c.nmethods = 1;
        c.method[0].ordering = CHOLMOD_AMD;
        c.postorder = 1;
    } else if (strcmp(ord, "metis") == 0) {
        c.nmethods = 1;
        c.method[0].ordering = CHOLMOD_METIS;
        c.postorder = 1;
    } else if (strcmp(ord, "default") != 0) {
        fprintf(stderr, "unknown ordering %s\n", ord);
        return 2;
    }
    FILE *f = fopen(argv[1], "r");
    if (!f) { perror(argv[1]); return 1; }
    cholmod_sparse *A = cholmod_read_sparse(f, &c);
    fclose(f);
    if (!A) { fprintf(stderr, "cannot read %s\n", argv[1]); return 1; }
    size_t n = A->nrow;
    cholmod_dense *B = cholmod_zeros(n, 1, CHOLMOD_REAL, &c);
    f = fopen(argv[2], "r");
    if (!f) { perror(argv[2]); return 1; }
    double *b = (double *)B->x;
    for (size_t i = 0; i < n; i++) {
        if (fscanf(f, "%lf", &b[i]) != 1) { fprintf(stderr, "%s: short at line %zu\n", argv[2], i + 1); return 1; }
    }
    fclose(f);
    double ta = 1e300, tf = 1e300, ts = 1e300;
    cholmod_factor *L = NULL;
    cholmod_dense *X = NULL;
    for (int r = 0; r < repeat; r++) {
        if (L) cholmod_free_factor(&L, &c);
        if (X) cholmod_free_dense(&X, &c);
        double t0 = now();
        L = cholmod_analyze(A, &c);
        double t1 = now();
        if (!L || !cholmod_factorize(A, L, &c) || c.status != CHOLMOD_OK) {
            fprintf(stderr, "factorisation failed, status %d\n", c.status);
            return 1;
        }
        double t2 = now();
        X = cholmod_solve(CHOLMOD_A, L, B, &c);
        double t3 = now();
        if (t1 - t0 < ta) ta = t1 - t0;
        if (t2 - t1 < tf) tf = t2 - t1;
        if (t3 - t2 < ts) ts = t3 - t2;
    }
    f = fopen(argv[3], "w");
    if (!f) { perror(argv[3]); return 1; }
    double *x = (double *)X->x;
    for (size_t i = 0; i < n; i++) fprintf(f, "%.17g\n", x[i]);
    fclose(f);
    const char *names[] = {"natural", "given", "amd", "metis", "nesdis", "colamd", "postordered"};
    int o = L->ordering;
    printf("{\"n\": %zu, \"lnz\": %.0f, \"stored\": %zu, \"supernodal\": %d, \"ordering\": \"%s\", "
           "\"analyze_s\": %.6f, \"factor_s\": %.6f, \"solve_s\": %.6f, \"flops\": %.6g, \"version\": \"%d.%d.%d\"}\n",
           n, c.lnz, L->is_super ? L->xsize : L->nzmax, L->is_super,
           (o >= 0 && o <= 6) ? names[o] : "other", ta, tf, ts, c.fl,
           CHOLMOD_MAIN_VERSION, CHOLMOD_SUB_VERSION, CHOLMOD_SUBSUB_VERSION);
    cholmod_free_factor(&L, &c);
    cholmod_free_dense(&X, &c);
    cholmod_free_dense(&B, &c);
    cholmod_free_sparse(&A, &c);
    cholmod_finish(&c);
    return 0;
}
