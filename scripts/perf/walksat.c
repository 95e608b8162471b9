/* walksat.c -- a minimal C loop of the focused random walk kiln's `walksat` runs, for the
 * speed comparison in scripts/bench-walksat.sh. The same rule (a uniformly chosen
 * unsatisfied clause; a free move when a variable breaks nothing, else a random variable
 * with probability `noise`, else a least-breaking one, ties uniformly), the same state (per
 * clause the true-literal count and the XOR of the true variables, packed in one 64-bit word;
 * the unsatisfied clauses
 * as a list with positions; occurrences as clause << 1 | negated) and the same bookkeeping of the best assignment (a flip log
 * folded every 2n flips). Its own random 3-SAT formula (same law, its own generator).
 *
 *   walksat N ALPHA NOISE FLIPS_PER_VARIABLE SEED
 *
 * Prints key=value: flips, solved, seconds (walk only, initial state included) and
 * ns_per_flip. Built with gcc -O3 -march=native against the shared references' common.h. */
#include "common.h"
#include <stdio.h>
#include <string.h>

int main(int argc, char **argv) {
    if (argc < 6) {
        fprintf(stderr, "usage: walksat N ALPHA NOISE FLIPS SEED\n");
        return 2;
    }
    int n = atoi(argv[1]);
    double alpha = atof(argv[2]), noise = atof(argv[3]);
    long budget = atol(argv[4]) * (long)n;
    rng_t r;
    rng_seed(&r, strtoull(argv[5], 0, 10));
    const int k = 3;
    long m = (long)(alpha * n + 0.5);
    uint32_t *lit = malloc(sizeof(uint32_t) * m * k);
    for (long c = 0; c < m; c++) {
        for (int j = 0; j < k;) {
            uint32_t v = rng_below(&r, n);
            int dup = 0;
            for (int i = 0; i < j; i++) dup |= (lit[c * k + i] >> 1) == v;
            if (dup) continue;
            lit[c * k + j++] = v << 1;
        }
        uint64_t bits = rng_next(&r);
        for (int j = 0; j < k; j++) lit[c * k + j] |= (bits >> j) & 1;
    }
    long *start = calloc(n + 1, sizeof(long));
    for (long p = 0; p < m * k; p++) start[(lit[p] >> 1) + 1]++;
    for (int v = 0; v < n; v++) start[v + 1] += start[v];
    long *fill = malloc(sizeof(long) * (n + 1));
    memcpy(fill, start, sizeof(long) * (n + 1));
    uint32_t *occ = malloc(sizeof(uint32_t) * m * k);
    for (long p = 0; p < m * k; p++) occ[fill[lit[p] >> 1]++] = (uint32_t)(p / k) << 1 | (lit[p] & 1);

    double t0 = now();
    int8_t *s = malloc(n), *base = malloc(n), *kept = malloc(n);
    for (int v = 0; v < n; v++) s[v] = (rng_next(&r) >> 63) ? -1 : 1;
    memcpy(base, s, n);
    memcpy(kept, s, n);
    const uint64_t ONE = 1ull << 32;
    uint64_t *st = calloc(m, 8);
    uint32_t *unsat = malloc(4 * m), *place = malloc(4 * m);
    long nu = 0;
    for (long c = 0; c < m; c++) {
        for (int j = 0; j < k; j++) {
            uint32_t l = lit[c * k + j];
            if ((s[l >> 1] < 0) == (l & 1)) { st[c] += ONE; st[c] ^= l >> 1; }
        }
        if (!(st[c] >> 32)) { place[c] = nu; unsat[nu++] = c; }
    }
    uint32_t *log = malloc(sizeof(uint32_t) * 2 * n);
    long nlog = 0, best = nu, best_at = -1, flips = 0;
    while (nu > 0 && flips < budget) {
        uint32_t c = unsat[rng_below(&r, nu)];
        uint32_t fewest = UINT32_MAX, pick = 0, ties = 0;
        for (int j = 0; j < k; j++) {
            uint32_t v = lit[c * k + j] >> 1, b = 0;
            for (long q = start[v]; q < start[v + 1]; q++) {
                uint32_t d = occ[q] >> 1;
                b += st[d] == (ONE | v);
            }
            if (b < fewest) { fewest = b; pick = v; ties = 1; }
            else if (b == fewest && rng_below(&r, ++ties) == 0) pick = v;
        }
        if (fewest > 0 && rng_unif(&r) < noise) pick = lit[c * k + rng_below(&r, k)] >> 1;
        int plain_true = s[pick] > 0;
        for (long q = start[pick]; q < start[pick + 1]; q++) {
            uint32_t o = occ[q], d = o >> 1;
            int was_true = plain_true == !(o & 1);
            st[d] ^= pick;
            if (was_true) {
                st[d] -= ONE;
                if (!(st[d] >> 32)) { place[d] = nu; unsat[nu++] = d; }
            } else {
                if (!(st[d] >> 32)) {
                    uint32_t last = unsat[--nu];
                    unsat[place[d]] = last;
                    place[last] = place[d];
                }
                st[d] += ONE;
            }
        }
        s[pick] = -s[pick];
        log[nlog++] = pick;
        flips++;
        if (nu < best) { best = nu; best_at = nlog; }
        if (nlog >= 2L * n) {
            if (best_at >= 0) {
                memcpy(kept, base, n);
                for (long i = 0; i < best_at; i++) kept[log[i]] = -kept[log[i]];
                best_at = -1;
            }
            memcpy(base, s, n);
            nlog = 0;
        }
    }
    double secs = now() - t0;
    printf("prog=c_walksat n=%d alpha=%g noise=%g flips=%ld solved=%d best=%ld seconds=%.3f ns_per_flip=%.3f\n",
           n, alpha, noise, flips, nu == 0, best, secs, secs * 1e9 / (flips ? flips : 1));
    return 0;
}
