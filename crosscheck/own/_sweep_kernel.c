/*
 * The usual path of one frequency sweep over KLU, compiled: for each frequency, A(w) = A0 + jw*A1,
 * its norms, a refactorization on the kept pivot order, one solve of every column, the normwise
 * backward error, and Higham's 1-norm estimate of inv(A). It is crosscheck.solver.MnaSystem._sweep's
 * loop body, step for step (that Python code is the reference, and the tests compare the two).
 *
 * Written by hand because no maintained package runs a KLU sweep loop; the KLU functions are passed
 * in as pointers (from the library crosscheck.klu_library loaded), so this file needs no headers but
 * C11's and links to nothing but libm. Anything out of the usual (a refactorization KLU refuses, a
 * backward error that asks for a fresh pivot order or refinement, an estimate that is not finite or
 * says "singular") stops the run at that frequency, unfinished, and the Python loop takes it from there.
 *
 * Speed notes, measured on a 1,000-node ladder, whose far nodes' voltages underflow to subnormal
 * numbers and zeros: glibc's hypot (cabs) costs ~9 ns an entry, so sizes are sqrt(re^2 + im^2) where
 * that cannot overflow or underflow; and arithmetic on subnormal numbers costs ~100 cycles, so this
 * file's own loops (norms, residuals, the estimator's vector work) run with subnormals flushed to
 * zero. KLU's calls and the matrix values do not: the solutions are bit for bit the Python loop's.
 *
 * Built by pip as an optional extension (setuptools; a C compiler is all it needs). Without it the
 * Python loop does everything, with the same results.
 */
#include <complex.h>
#include <math.h>
#include <string.h>
#if defined(__SSE2__)
#include <xmmintrin.h>
#endif

typedef int (*refactor_fn)(int *ap, int *ai, double *ax, void *symbolic, void *numeric, void *common);
typedef int (*solve_fn)(void *symbolic, void *numeric, int ldim, int nrhs, double *b, void *common);
typedef int (*tsolve_fn)(void *symbolic, void *numeric, int ldim, int nrhs, double *b, int conj, void *common);

/* The KLU objects of one chain of refactorizations, and its buffers (all owned by the caller). */
typedef struct {
    int n;                 /* unknowns */
    int *ap, *ai;          /* the CSC pattern */
    const double *a0, *a1; /* A0 and A1 on the pattern */
    const int *entry_col;  /* each stored entry's column */
    refactor_fn refactor;
    solve_fn solve;
    tsolve_fn tsolve;
    void *symbolic, *numeric, *common;
    double refine_above;       /* backward error above which the Python loop takes the frequency */
    double singular_condition; /* a condition above this is a singular matrix */
    double complex *values;    /* nnz: A(w)'s entries */
    double complex *y;         /* n x (k + 2), column-major: the block solve */
    double complex *z;         /* n: the estimator's adjoint solves */
    double complex *r;         /* n: one residual column */
    double *col_sum, *row_sum; /* n each */
} chain;

/* ------------------------------------------------------------------ floating-point mode */

#if defined(__SSE2__)
typedef unsigned int fp_mode;
static fp_mode fp_get(void) { return _mm_getcsr(); }
static void fp_set(fp_mode mode) { _mm_setcsr(mode); }
static fp_mode fp_flushing(fp_mode mode) { return mode | 0x8040u; } /* flush-to-zero, denormals-are-zero */
#else
typedef int fp_mode; /* elsewhere subnormals are only slow, not wrong */
static fp_mode fp_get(void) { return 0; }
static void fp_set(fp_mode mode) { (void)mode; }
static fp_mode fp_flushing(fp_mode mode) { return mode; }
#endif

/* KLU's calls, each in the caller's own floating-point mode (so its results match the Python loop's). */
typedef struct {
    chain *c;
    fp_mode caller, flushing;
} run;

static int klu_refactor(run *u) {
    fp_set(u->caller);
    int ok = u->c->refactor(u->c->ap, u->c->ai, (double *)u->c->values, u->c->symbolic, u->c->numeric, u->c->common);
    fp_set(u->flushing);
    return ok;
}

static int klu_solve(run *u, double complex *b, int columns) {
    fp_set(u->caller);
    int ok = u->c->solve(u->c->symbolic, u->c->numeric, u->c->n, columns, (double *)b, u->c->common);
    fp_set(u->flushing);
    return ok;
}

static int klu_adjoint_solve(run *u, double complex *b) {
    fp_set(u->caller);
    int ok = u->c->tsolve(u->c->symbolic, u->c->numeric, u->c->n, 1, (double *)b, 1, u->c->common);
    fp_set(u->flushing);
    return ok;
}

/* ------------------------------------------------------------------ sizes */

static const double two_pi = 2.0 * 3.14159265358979323846; /* as Python's 2 * math.pi */
static const double tiny = 2.2250738585072014e-308;       /* the smallest normal double */

/* |v|: sqrt(re^2 + im^2) where that neither overflows nor loses digits to underflow, else hypot. */
static inline double size_of(double complex v) {
    double re = creal(v), im = cimag(v), size = sqrt(re * re + im * im);
    if (size > 1e-150 && size < 1e150) return size;
    return re == 0.0 && im == 0.0 ? 0.0 : hypot(re, im);
}

/* sum |v_i|, branch-free (vectorized); hypot only when the sum says the fast sizes may be off. */
static double sum_abs(const double complex *v, int n) {
    double s = 0.0;
    for (int i = 0; i < n; i++) s += sqrt(creal(v[i]) * creal(v[i]) + cimag(v[i]) * cimag(v[i]));
    if (s > 1e-140 && s < 1e140) return s; /* entries below 1e-154 (squares lost) add < n*1e-154 */
    s = 0.0;
    for (int i = 0; i < n; i++) s += size_of(v[i]);
    return s;
}

/* ------------------------------------------------------------------ one frequency's parts */

/* ||A||_1 and ||A||_inf from c->values (largest column and row sums of |a_ij|). */
static void norms(const chain *c, double *norm_1, double *norm_inf) {
    const int n = c->n, nnz = c->ap[n];
    memset(c->col_sum, 0, sizeof(double) * (size_t)n);
    memset(c->row_sum, 0, sizeof(double) * (size_t)n);
    for (int p = 0; p < nnz; p++) {
        double size = size_of(c->values[p]);
        c->col_sum[c->entry_col[p]] += size;
        c->row_sum[c->ai[p]] += size;
    }
    *norm_1 = *norm_inf = 0.0;
    for (int i = 0; i < n; i++) {
        if (c->col_sum[i] > *norm_1) *norm_1 = c->col_sum[i];
        if (c->row_sum[i] > *norm_inf) *norm_inf = c->row_sum[i];
    }
}

/* Whether x solves A x = b with normwise backward error max|b - A x| / (||A||_inf max|x| + max|b|)
 * at most c->refine_above (a NaN anywhere fails). */
static int accurate(const chain *c, const double complex *x, const double complex *b, double b_size,
                    double norm_inf) {
    const int n = c->n;
    memset(c->r, 0, sizeof(double complex) * (size_t)n);
    double x_square = 0.0;
    for (int col = 0; col < n; col++) {
        double square = creal(x[col]) * creal(x[col]) + cimag(x[col]) * cimag(x[col]);
        if (square > x_square) x_square = square;
        for (int p = c->ap[col]; p < c->ap[col + 1]; p++) c->r[c->ai[p]] += c->values[p] * x[col];
    }
    double r_square = 0.0;
    int nan = 0;
    for (int i = 0; i < n; i++) {
        double complex d = b[i] - c->r[i];
        double square = creal(d) * creal(d) + cimag(d) * cimag(d);
        if (square > r_square) r_square = square;
        nan |= isnan(square);
    }
    if (nan) return 0;
    double x_size = sqrt(x_square), r_size = sqrt(r_square);
    if (!(x_size > 1e-150 && x_size < 1e150)) { /* squares out of range: the careful size */
        x_size = 0.0;
        for (int i = 0; i < n; i++) {
            double s = size_of(x[i]);
            if (s > x_size) x_size = s;
        }
    }
    /* Right-hand sides below solver.TINY_RHS never reach here, so the scale is 0 (x = b = 0) or normal. */
    double scale = norm_inf * x_size + b_size;
    if (r_square == 0.0 && scale >= 1e-130) return 1; /* every |r_i| < 1.5e-154: far below refine_above*scale */
    if (!(r_size > 1e-150 && r_size < 1e150)) {
        r_size = 0.0;
        for (int i = 0; i < n; i++) {
            double t = size_of(b[i] - c->r[i]);
            if (t > r_size) r_size = t;
        }
    }
    /* Divided, as the Python loop divides (a reciprocal would round once more). */
    return r_size / (scale > 0 ? scale : 1.0) <= c->refine_above;
}

/* ||inv(A)||_1 by Higham's iteration from y = inv(A)*x (x: e_start, or e/n when *start < 0), as
 * solver._inverse_norm; -1 when a solve fails or is not finite (the Python loop then reports it). */
static double inverse_norm(run *u, double complex *y, const double complex *ramp, int *start) {
    chain *c = u->c;
    const int n = c->n;
    double estimate = sum_abs(y, n);
    if (!isfinite(estimate)) return -1.0;
    int j = *start;
    for (int iteration = 0; iteration < 5; iteration++) { /* at most five, as in LAPACK's ZLACN2 */
        for (int i = 0; i < n; i++) {
            double size = size_of(y[i]);
            c->z[i] = size >= tiny ? CMPLX(creal(y[i]) / size, cimag(y[i]) / size) : 1.0;
        }
        if (!klu_adjoint_solve(u, c->z)) return -1.0;
        int j_last = j, best = 0;
        double best_square = -1.0;
        for (int i = 0; i < n; i++) {
            double square = creal(c->z[i]) * creal(c->z[i]) + cimag(c->z[i]) * cimag(c->z[i]);
            if (isnan(square)) return -1.0;
            if (square > best_square) { best_square = square; best = i; }
        }
        j = best;
        if (j_last >= 0 && size_of(c->z[j_last]) >= size_of(c->z[j])) { j = j_last; break; }
        memset(y, 0, sizeof(double complex) * (size_t)n);
        y[j] = 1.0;
        if (!klu_solve(u, y, 1)) return -1.0;
        double latest = sum_abs(y, n);
        if (!isfinite(latest)) return -1.0;
        if (latest <= estimate) break;
        estimate = latest;
    }
    *start = j;
    double safeguard = 2.0 * sum_abs(ramp, n) / (3.0 * n);
    return estimate > safeguard ? estimate : safeguard;
}

/* ------------------------------------------------------------------ the run */

static int sweep(run *u, int nf, const double *freqs, int k, int estimate, const double complex *rhs,
                 const double *rhs_sizes, double complex *columns, int *peak, double complex *xs, double *conds) {
    chain *c = u->c;
    const int n = c->n, width = estimate ? k + 2 : k, nnz = c->ap[n];
    for (int f = 0; f < nf; f++) {
        const double omega = two_pi * freqs[f];
        fp_set(u->caller); /* A(w)'s entries exactly as the Python loop's, subnormals included */
        for (int p = 0; p < nnz; p++) c->values[p] = CMPLX(c->a0[p], c->a1[p] * omega);
        fp_set(u->flushing);
        double norm_1, norm_inf;
        norms(c, &norm_1, &norm_inf);
        if (!klu_refactor(u)) return f;
        memcpy(c->y, columns, sizeof(double complex) * (size_t)n * (size_t)width);
        if (!klu_solve(u, c->y, width)) return f;
        for (int v = 0; v < k; v++)
            if (!accurate(c, c->y + (size_t)v * n, rhs + (size_t)v * n, rhs_sizes[v], norm_inf)) return f;
        if (estimate) {
            int j = *peak;
            double inverse = inverse_norm(u, c->y + (size_t)(k + 1) * n, c->y + (size_t)k * n, &j);
            double condition = norm_1 * inverse;
            if (!(inverse >= 0.0) || !(condition <= c->singular_condition)) return f;
            if (j != *peak) { /* the next frequency starts from column j */
                memset(columns + (size_t)(k + 1) * n, 0, sizeof(double complex) * (size_t)n);
                columns[(size_t)(k + 1) * n + j] = 1.0;
                *peak = j;
            }
            conds[f] = condition;
        }
        for (int i = 0; i < n; i++)
            for (int v = 0; v < k; v++) xs[((size_t)f * n + i) * k + v] = c->y[(size_t)v * n + i];
    }
    return nf;
}

/*
 * Frequencies freqs[0..nf) of one chain whose numeric factor was last refactored (or factored) by the
 * Python loop. rhs: n x k, column-major; rhs_sizes: max |rhs| of each column; columns: column-major,
 * n x (k + 2) with the estimate (the right-hand sides, LAPACK's ramp, the estimator's start vector
 * e_peak, updated here), else n x k (the right-hand sides). xs: nf x n x k, row-major, as the Python
 * loop's; conds: nf (left alone without the estimate). Returns how many frequencies were finished; the
 * next one, if any, is for the Python loop. The caller's floating-point mode is restored on return.
 */
int crosscheck_sweep(chain *c, int nf, const double *freqs, int k, int estimate, const double complex *rhs,
                     const double *rhs_sizes, double complex *columns, int *peak, double complex *xs,
                     double *conds) {
    run u = {c, fp_get(), fp_flushing(fp_get())};
    fp_set(u.flushing);
    int done = sweep(&u, nf, freqs, k, estimate, rhs, rhs_sizes, columns, peak, xs, conds);
    fp_set(u.caller);
    return done;
}
