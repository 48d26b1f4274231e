/*
 * poisson2d: a small external solver for -lap u = f on a rectangle, used to
 * show how a compiled program is verified through mmsverify's case files.
 *
 *   node-centred 5-point finite differences (second order);
 *   Dirichlet sides take the exact solution; Neumann sides use a ghost node
 *   eliminated with the centred difference of the outward normal derivative;
 *   successive over-relaxation with Young's optimal factor.
 *
 * The manufactured source term and boundary data come from a header that
 * mmsverify generates for the problem (mms_problem.h):
 *
 *   mmsverify export plate-poisson --lang c -o mms_problem.h
 *   cc -std=c99 -O2 -I. poisson2d.c -o poisson2d -lm
 *   mmsverify run plate-poisson --external "./poisson2d {case}"
 *
 * Usage: poisson2d CASEFILE. The case file is flat "key = value" text (see
 * mmsverify.execute.external.write_case); this program reads cells, lower, upper,
 * output and the optional param.omega, param.tolerance, param.max_sweeps.
 * It writes CSV with columns x, y, volume and the field, one row per node.
 * Exit codes: 0 solved, 2 bad case file or problem, 3 no convergence, 4 I/O.
 *
 * Its first line of output, "content_hash = ...", reports the problem the
 * header was exported from; mmsverify compares it with the problem it runs
 * and refuses a program built for another one ("rebuild").
 */
#include <errno.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "mms_problem.h"

#if MMS_DIM != 2 || MMS_TRANSIENT != 0 || MMS_NFIELDS != 1
#error "poisson2d solves one steady field in two dimensions; export a matching problem"
#endif

#define MAX_LINE 4096

struct settings {
    int cells[2];
    double lower[2], upper[2];
    char output[MAX_LINE];
    double omega;       /* 0: Young's optimal factor */
    double tolerance;   /* on the largest update, relative to max |u| */
    long max_sweeps;
    int have_cells, have_lower, have_upper, have_output;
};

static int fail(int code, const char *what, const char *detail)
{
    fprintf(stderr, "poisson2d: %s%s%s\n", what, detail ? ": " : "", detail ? detail : "");
    return code;
}

/* "[a, b]" -> two numbers */
static int read_pair(const char *value, double out[2])
{
    return sscanf(value, " [ %lf , %lf ]", &out[0], &out[1]) == 2;
}

/* "\"text\"" with \\ and \" escapes -> text */
static int read_string(const char *value, char *out, size_t size)
{
    const char *p = strchr(value, '"');
    size_t n = 0;
    if (!p) return 0;
    for (++p; *p && *p != '"'; ++p) {
        if (*p == '\\' && (p[1] == '\\' || p[1] == '"')) ++p;
        if (n + 1 >= size) return 0;
        out[n++] = *p;
    }
    out[n] = '\0';
    return *p == '"';
}

static int read_case(const char *path, struct settings *s)
{
    char line[MAX_LINE];
    FILE *fh = fopen(path, "r");
    if (!fh) return fail(2, "cannot open the case file", strerror(errno));
    while (fgets(line, sizeof line, fh)) {
        char key[128];
        char *eq = strchr(line, '=');
        double pair[2];
        if (line[0] == '#' || !eq || sscanf(line, " %127[A-Za-z0-9_.]", key) != 1) continue;
        ++eq;
        if (strcmp(key, "cells") == 0 && read_pair(eq, pair)) {
            s->cells[0] = (int)pair[0];
            s->cells[1] = (int)pair[1];
            s->have_cells = 1;
        } else if (strcmp(key, "lower") == 0) {
            s->have_lower = read_pair(eq, s->lower);
        } else if (strcmp(key, "upper") == 0) {
            s->have_upper = read_pair(eq, s->upper);
        } else if (strcmp(key, "output") == 0) {
            s->have_output = read_string(eq, s->output, sizeof s->output);
        } else if (strcmp(key, "param.omega") == 0) {
            s->omega = strtod(eq, NULL);
        } else if (strcmp(key, "param.tolerance") == 0) {
            s->tolerance = strtod(eq, NULL);
        } else if (strcmp(key, "param.max_sweeps") == 0) {
            s->max_sweeps = strtol(eq, NULL, 10);
        }
    }
    fclose(fh);
    if (!(s->have_cells && s->have_lower && s->have_upper && s->have_output))
        return fail(2, "the case file lacks one of cells, lower, upper, output", path);
    if (s->cells[0] < 2 || s->cells[1] < 2)
        return fail(2, "need at least 2 cells per direction", path);
    return 0;
}

/* Young's optimal factor from the Jacobi spectral radius; a Neumann end doubles the effective length */
static double optimal_omega(int nx, int ny, double ax, double ay, const int neumann[4])
{
    double lx = (neumann[0] || neumann[1]) ? 2.0 * nx : nx;
    double ly = (neumann[2] || neumann[3]) ? 2.0 * ny : ny;
    double rho = (ax * cos(M_PI / lx) + ay * cos(M_PI / ly)) / (ax + ay);
    return 2.0 / (1.0 + sqrt(1.0 - rho * rho));
}

int main(int argc, char **argv)
{
    struct settings s = {{0, 0}, {0, 0}, {0, 0}, "", 0.0, 1e-13, 1000000L, 0, 0, 0, 0};
    int nx, ny, i, j, side, neumann[4], code;
    double hx, hy, ax, ay, diag, omega, change, size;
    double *u, *f;
    char *fixed;
    long sweep;
    FILE *out;

    printf("content_hash = %s\n", MMS_CONTENT_HASH);
    fflush(stdout);
    if (argc != 2) return fail(2, "usage: poisson2d CASEFILE", NULL);
    if ((code = read_case(argv[1], &s)) != 0) return code;
    nx = s.cells[0];
    ny = s.cells[1];
    hx = (s.upper[0] - s.lower[0]) / nx;
    hy = (s.upper[1] - s.lower[1]) / ny;
    ax = 1.0 / (hx * hx);
    ay = 1.0 / (hy * hy);
    diag = 2.0 * ax + 2.0 * ay;
    for (side = 0; side < 4; ++side) neumann[side] = mms_is_neumann(0, side);
    if (neumann[0] && neumann[1] && neumann[2] && neumann[3])
        return fail(2, "every side is Neumann; the solution is fixed only up to a constant", NULL);

    u = calloc((size_t)(nx + 1) * (ny + 1), sizeof *u);
    f = calloc((size_t)(nx + 1) * (ny + 1), sizeof *f);
    fixed = calloc((size_t)(nx + 1) * (ny + 1), 1);
    if (!u || !f || !fixed) return fail(4, "out of memory", NULL);

#define AT(i, j) ((size_t)(j) * (nx + 1) + (i))
    for (j = 0; j <= ny; ++j) {
        for (i = 0; i <= nx; ++i) {
            double x = s.lower[0] + i * hx, y = s.lower[1] + j * hy;
            int on[4] = {i == 0, i == nx, j == 0, j == ny};
            size_t k = AT(i, j);
            for (side = 0; side < 4; ++side)
                if (on[side] && !neumann[side]) fixed[k] = 1;
            if (fixed[k]) {
                u[k] = mms_exact(0, x, y);
                continue;
            }
            /* ghost nodes: u_ghost = u_mirror + 2 h g, so the row gains 2 g / h */
            f[k] = mms_source(0, x, y);
            if (on[0]) f[k] += 2.0 * mms_dudn(0, 0, x, y) / hx;
            if (on[1]) f[k] += 2.0 * mms_dudn(0, 1, x, y) / hx;
            if (on[2]) f[k] += 2.0 * mms_dudn(0, 2, x, y) / hy;
            if (on[3]) f[k] += 2.0 * mms_dudn(0, 3, x, y) / hy;
        }
    }

    omega = s.omega > 0.0 ? s.omega : optimal_omega(nx, ny, ax, ay, neumann);
    for (sweep = 0; sweep < s.max_sweeps; ++sweep) {
        change = 0.0;
        size = 0.0;
        for (j = 0; j <= ny; ++j) {
            for (i = 0; i <= nx; ++i) {
                size_t k = AT(i, j);
                double west, east, south, north, gs, delta;
                if (fixed[k]) {
                    if (fabs(u[k]) > size) size = fabs(u[k]);
                    continue;
                }
                west = i > 0 ? u[AT(i - 1, j)] : u[AT(i + 1, j)];
                east = i < nx ? u[AT(i + 1, j)] : u[AT(i - 1, j)];
                south = j > 0 ? u[AT(i, j - 1)] : u[AT(i, j + 1)];
                north = j < ny ? u[AT(i, j + 1)] : u[AT(i, j - 1)];
                gs = (f[k] + ax * (west + east) + ay * (south + north)) / diag;
                delta = omega * (gs - u[k]);
                u[k] += delta;
                if (fabs(delta) > change) change = fabs(delta);
                if (fabs(u[k]) > size) size = fabs(u[k]);
            }
        }
        if (!isfinite(change)) return fail(3, "the iteration diverged", NULL);
        if (change <= s.tolerance * (size > 1.0 ? size : 1.0)) break;
    }
    if (sweep == s.max_sweeps) return fail(3, "no convergence within param.max_sweeps sweeps", NULL);
    printf("poisson2d: %dx%d cells, %ld SOR sweeps (omega %.4f)\n", nx, ny, sweep + 1, omega);

    out = fopen(s.output, "w");
    if (!out) return fail(4, "cannot write the output file", strerror(errno));
    fprintf(out, "x,y,volume,%s\n", mms_field_name(0));
    for (j = 0; j <= ny; ++j) {
        for (i = 0; i <= nx; ++i) {
            double wx = (i == 0 || i == nx) ? 0.5 * hx : hx, wy = (j == 0 || j == ny) ? 0.5 * hy : hy;
            fprintf(out, "%.17g,%.17g,%.17g,%.17g\n", s.lower[0] + i * hx, s.lower[1] + j * hy, wx * wy,
                    u[AT(i, j)]);
        }
    }
    if (fclose(out) != 0) return fail(4, "cannot finish the output file", strerror(errno));
    free(u);
    free(f);
    free(fixed);
    return 0;
}
