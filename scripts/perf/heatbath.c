/* heatbath.c -- a minimal heat-bath (Glauber) reference for kiln's `glauber`, built by
 * scripts/bench-samplers.sh with the shared perf references' common.h (same RNG, same dense
 * SK instance generator as the annealing references).
 *
 * usage: ./heatbath dense  [n=2048]    [sweeps=200] [beta=1.0] [seeds=3] [first_seed=1]
 *        ./heatbath sparse [n=1000000] [sweeps=200] [beta=1.0] [seed=1]
 * build: gcc -O3 -march=native -I<perf-ref> heatbath.c -o heatbath -lm
 *
 * Both: sequential sweeps i = 0..n-1 at fixed beta from a uniformly random start; per
 * attempt one uniform u in [0,1) (53 bits of one PCG64 output, as kiln draws it) and sigma_i = +1 iff u * (1 + exp(-2 beta h_i)) < 1 (the
 * heat-bath rule, the same arithmetic as kiln's); a changed spin updates the fields.
 * dense: SK, fields kept and updated in O(n) per change (sk_flip), one exp per attempt.
 * sparse: +-1 couplings on a random 3-regular graph (configuration model with rejection, as
 * sa_sparse.c), fields kept as small integers, the factors 1 + exp(-2 beta h) tabulated for
 * h = -3..3 once. Timing covers the sweeps only. Reported: attempts/s (dense, median over
 * seeds) or ns per attempt (sparse), the flip ratio and the final energy per spin
 * E/n = sum_{i<j} J_ij s_i s_j / n (larger is better, kiln's sign).
 */
#include <stdio.h>
#include <string.h>
#include "common.h"

/* The per-attempt uniform comes from PCG64 (128-bit LCG, XSL-RR output: the generator of
 * kiln's streams), so both sides pay the same RNG cost per attempt; instances and starts use
 * common.h's xoshiro256**. */
typedef struct { __uint128_t state, inc; } pcg_t;
static inline uint64_t pcg_next(pcg_t *p) {
    const __uint128_t mult = ((__uint128_t)0x2360ed051fc65da4ull << 64) | 0x4385df649fccf645ull;
    p->state = p->state * mult + p->inc;
    uint64_t x = (uint64_t)(p->state >> 64) ^ (uint64_t)p->state;
    unsigned rot = (unsigned)(p->state >> 122);
    return (x >> rot) | (x << ((64 - rot) & 63));
}
static inline double pcg_unif(pcg_t *p) { return (pcg_next(p) >> 11) * 0x1.0p-53; }
static inline pcg_t pcg_seed(rng_t *r) {
    pcg_t p;
    p.state = ((__uint128_t)rng_next(r) << 64) | rng_next(r);
    p.inc = (((__uint128_t)rng_next(r) << 64) | rng_next(r)) | 1;
    return p;
}

static int dense(int argc, char **argv) {
    int n = argc > 2 ? atoi(argv[2]) : 2048;
    int S = argc > 3 ? atoi(argv[3]) : 200;
    double beta = argc > 4 ? atof(argv[4]) : 1.0;
    int ns = argc > 5 ? atoi(argv[5]) : 3;
    int s0 = argc > 6 ? atoi(argv[6]) : 1;
    int8_t *s = malloc(n);
    double *h = aligned_alloc(64, n * sizeof(double));
    double *rate = malloc(ns * sizeof(double));
    double esum = 0, flipsum = 0;
    for (int k = 0; k < ns; k++) {
        double *J = sk_instance(n, s0 + k);
        rng_t r;
        rng_seed(&r, s0 + k + 1000);
        for (int i = 0; i < n; i++) s[i] = (rng_next(&r) >> 63) ? 1 : -1;
        sk_fields(n, J, s, h);
        pcg_t u = pcg_seed(&r);
        long flips = 0;
        double t0 = now();
        for (int sw = 0; sw < S; sw++) {
            for (int i = 0; i < n; i++) {
                int up = pcg_unif(&u) * (1.0 + exp(-2.0 * beta * h[i])) < 1.0;
                if (up != (s[i] > 0)) {
                    sk_flip(n, J, s, h, i);
                    flips++;
                }
            }
        }
        double t1 = now();
        rate[k] = (double)n * S / (t1 - t0);
        esum += sk_energy(n, J, s) / n;
        flipsum += (double)flips / ((double)n * S);
        free(J);
    }
    printf("prog=heatbath_dense n=%d sweeps=%d beta=%.3f seeds=%d attempts_per_s_med=%.3e "
           "flip_ratio=%.4f E_per_spin=%.5f\n",
           n, S, beta, ns, median(rate, ns), flipsum / ns, esum / ns);
    return 0;
}

static int sparse(int argc, char **argv) {
    int n = argc > 2 ? atoi(argv[2]) : 1000000;
    int S = argc > 3 ? atoi(argv[3]) : 200;
    double beta = argc > 4 ? atof(argv[4]) : 1.0;
    uint64_t seed = argc > 5 ? strtoull(argv[5], 0, 10) : 1;
    const int d = 3;
    size_t m = (size_t)n * d;
    uint32_t *stub = malloc(m * sizeof *stub);
    int32_t *col = malloc(m * sizeof *col);
    int8_t *J = malloc(m), *s = malloc(n), *h = malloc(n);
    rng_t r;
    rng_seed(&r, seed);
    int simple = 0;
    while (!simple) {
        for (size_t k = 0; k < m; k++) stub[k] = (uint32_t)k;
        for (size_t k = m - 1; k > 0; k--) {
            size_t j = rng_below(&r, (uint32_t)(k + 1));
            uint32_t t = stub[k]; stub[k] = stub[j]; stub[j] = t;
        }
        for (size_t k = 0; k < m; k += 2) {
            uint32_t a = stub[k], b = stub[k + 1];
            int8_t c = (rng_next(&r) >> 63) ? 1 : -1;
            col[a] = (int32_t)(b / d); J[a] = c;
            col[b] = (int32_t)(a / d); J[b] = c;
        }
        simple = 1;
        for (int v = 0; v < n && simple; v++) {
            const int32_t *c = col + (size_t)d * v;
            if (c[0] == v || c[1] == v || c[2] == v || c[0] == c[1] || c[0] == c[2] ||
                c[1] == c[2])
                simple = 0;
        }
    }
    free(stub);
    for (int i = 0; i < n; i++) s[i] = (rng_next(&r) >> 63) ? 1 : -1;
    for (int i = 0; i < n; i++) {
        int f = 0;
        for (int e = 0; e < d; e++) f += J[(size_t)d * i + e] * s[col[(size_t)d * i + e]];
        h[i] = (int8_t)f;
    }
    pcg_t u = pcg_seed(&r);
    double factor[7];
    for (int k = -3; k <= 3; k++) factor[k + 3] = 1.0 + exp(-2.0 * beta * k);
    long flips = 0;
    double t0 = now();
    for (int sw = 0; sw < S; sw++) {
        for (int i = 0; i < n; i++) {
            int up = pcg_unif(&u) * factor[h[i] + 3] < 1.0;
            if (up != (s[i] > 0)) {
                s[i] = (int8_t)-s[i];
                int c = 2 * s[i];
                for (int e = 0; e < d; e++) {
                    size_t x = (size_t)d * i + e;
                    h[col[x]] = (int8_t)(h[col[x]] + c * J[x]);
                }
                flips++;
            }
        }
    }
    double t1 = now();
    long e2 = 0;
    for (int i = 0; i < n; i++)
        for (int e = 0; e < d; e++) e2 += J[(size_t)d * i + e] * s[i] * s[col[(size_t)d * i + e]];
    printf("prog=heatbath_sparse n=%d degree=3 sweeps=%d beta=%.3f ns_per_attempt=%.3f "
           "flip_ratio=%.4f E_per_spin=%.5f\n",
           n, S, beta, (t1 - t0) * 1e9 / ((double)n * S), (double)flips / ((double)n * S),
           0.5 * (double)e2 / n);
    return 0;
}

int main(int argc, char **argv) {
    if (argc > 1 && strcmp(argv[1], "sparse") == 0) return sparse(argc, argv);
    return dense(argc, argv);
}
