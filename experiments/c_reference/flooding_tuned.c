/*
 * Tuned scalar flooding decoder for binary LDPC codes, a speed reference for
 * the frame-interleaved kernels of ldpcmarg (experiments/bench_message_passing.py
 * compiles it with gcc -O3 -march=native and calls it through ctypes on the
 * same LLRs). The plain reference is flooding.c beside this file.
 *
 * What is tuned: no branches on message signs (copysign / sign products),
 * the two smallest magnitudes of min-sum kept with selects, and sum-product's
 * box-plus in the exp/log form tanh(x/2) = (1 - e^-x)/(1 + e^-x),
 * 2 atanh(p) = log((1 + p)/(1 - p)) with prefix/suffix products.
 *
 * Conventions as flooding.c: LLR = ln P(x=0)/P(x=1); edges in check-major (CSR)
 * order; var_edges lists the edges of every bit. One iteration = check pass +
 * bit pass; before each iteration the hard decision is tested (stop at the
 * first failing check); a frame stops when it is a codeword.
 *
 * mode 0: sum-product (exp/log box-plus, product clamped to 1 - 2^-53);
 * mode 1: min-sum, c2v = prod sign * min(max(alpha * min|v| - beta, 0), 1e4).
 */
#include <math.h>
#include <stdint.h>
#include <stdlib.h>

static int hard_ok(int m, const int64_t *check_ptr, const int64_t *edge_var, const double *L)
{
    for (int c = 0; c < m; c++) {
        int par = 0;
        for (int64_t e = check_ptr[c]; e < check_ptr[c + 1]; e++)
            par ^= (L[edge_var[e]] < 0.0);
        if (par)
            return 0;
    }
    return 1;
}

int decode_tuned(int F, int n, int m, const int64_t *check_ptr, const int64_t *edge_var,
                 const int64_t *var_ptr, const int64_t *var_edges, const double *llr,
                 int max_iter, int mode, double alpha, double beta, double *post,
                 int64_t *iters, uint8_t *valid)
{
    const int64_t E = check_ptr[m];
    int dmax = 0;
    for (int c = 0; c < m; c++)
        if (check_ptr[c + 1] - check_ptr[c] > dmax)
            dmax = (int)(check_ptr[c + 1] - check_ptr[c]);
    double *c2v = malloc(sizeof(double) * E);
    double *v2c = malloc(sizeof(double) * E);
    double *t = malloc(sizeof(double) * (dmax + 1));
    double *pre = malloc(sizeof(double) * (dmax + 1));
    if (!c2v || !v2c || !t || !pre)
        return -1;
    const double pmax = 1.0 - 0x1p-53, cap = 1e4;
    for (int f = 0; f < F; f++) {
        const double *y = llr + (int64_t)f * n;
        double *L = post + (int64_t)f * n;
        for (int i = 0; i < n; i++)
            L[i] = y[i];
        for (int64_t e = 0; e < E; e++) {
            c2v[e] = 0.0;
            v2c[e] = y[edge_var[e]];
        }
        int it = 0, ok = 0;
        for (;;) {
            ok = hard_ok(m, check_ptr, edge_var, L);
            if (ok || it >= max_iter)
                break;
            for (int c = 0; c < m; c++) {
                const int64_t a = check_ptr[c];
                const int d = (int)(check_ptr[c + 1] - a);
                if (mode == 0) {
                    double acc = 1.0, sprod = 1.0;
                    for (int k = 0; k < d; k++) {
                        double v = v2c[a + k];
                        double ex = exp(-fabs(v));
                        sprod *= copysign(1.0, v);
                        t[k] = (1.0 - ex) / (1.0 + ex);
                        pre[k] = acc;
                        acc *= t[k];
                    }
                    acc = 1.0;
                    for (int k = d - 1; k >= 0; k--) {
                        double p = pre[k] * acc;
                        acc *= t[k];
                        p = p > pmax ? pmax : p;
                        c2v[a + k] = log((1.0 + p) / (1.0 - p)) * sprod * copysign(1.0, v2c[a + k]);
                    }
                } else {
                    double min1 = INFINITY, min2 = INFINITY, sprod = 1.0;
                    int idx = -1;
                    for (int k = 0; k < d; k++) {
                        double v = v2c[a + k];
                        double x = fabs(v);
                        sprod *= copysign(1.0, v);
                        const double hi = x > min1 ? x : min1;
                        min2 = hi < min2 ? hi : min2;
                        idx = x < min1 ? k : idx;
                        min1 = x < min1 ? x : min1;
                    }
                    double m1 = alpha * min1 - beta, m2 = alpha * min2 - beta;
                    m1 = m1 > 0.0 ? (m1 < cap ? m1 : cap) : 0.0;
                    m2 = m2 > 0.0 ? (m2 < cap ? m2 : cap) : 0.0;
                    m1 *= sprod;
                    m2 *= sprod;
                    for (int k = 0; k < d; k++)
                        c2v[a + k] = (k == idx ? m2 : m1) * copysign(1.0, v2c[a + k]);
                }
            }
            for (int i = 0; i < n; i++) {
                double s = y[i];
                for (int64_t q = var_ptr[i]; q < var_ptr[i + 1]; q++)
                    s += c2v[var_edges[q]];
                L[i] = s;
                for (int64_t q = var_ptr[i]; q < var_ptr[i + 1]; q++)
                    v2c[var_edges[q]] = s - c2v[var_edges[q]];
            }
            it++;
        }
        iters[f] = it;
        valid[f] = (uint8_t)ok;
    }
    free(c2v); free(v2c); free(t); free(pre);
    return 0;
}
