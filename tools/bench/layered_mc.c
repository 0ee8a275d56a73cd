/*
 * layered_mc.c: a small, single-threaded C implementation of the classic layered Monte Carlo of
 * Wang, Jacques & Zheng (1995), "MCML - Monte Carlo modeling of light transport in multi-layered
 * tissues", Comput. Methods Programs Biomed. 47, 131-146, written for matgen from the paper's description
 * (sections 3.1-3.9) as a side-by-side timing reference for `matgen bench transport --reference-command`.
 *
 * Steps per photon packet (the paper's names): launch (specular loss at entry), hop (step length
 * s = -ln(xi) / mu_t, cut at a boundary), cross boundary (Fresnel reflection decided by one uniform,
 * Snell refraction), drop (at each interaction the fraction mu_a / mu_t of the weight is absorbed), spin
 * (Henyey-Greenstein polar angle by inversion, eq. 3.28; uniform azimuth, eqs. 3.30-3.31), roulette
 * (below weight 1e-4 the packet survives with chance 0.1). Normal incidence only; no clear layers.
 *
 * Units: mm, 1/mm. Random numbers: xoshiro256+ (Blackman & Vigna 2018) seeded by SplitMix64.
 *
 * Build:  gcc -O3 -march=native -o layered_mc tools/bench/layered_mc.c -lm
 * Input:  a text file, first line "n_above n_below", then one line per layer, top first:
 *         "thickness_mm n mu_a_per_mm mu_s_per_mm g"
 * Usage:  layered_mc LAYERS_FILE PHOTONS [SEED [grid]]
 *         with "grid", every drop is also scored on an r-z grid of absorbed weight and every exit on an
 *         r-angle grid of reflectance and transmittance, as the paper's program records them (sec. 3.6, 4):
 *         100 radial bins of 0.05 mm, 100 depth bins over the stack, 30 exit-angle bins.
 * Output: "Rsp <value>", "Rd <value> <stderr>", "Tt <value> <stderr>", "photons <n>", "elapsed_s <t>"
 */
#include <math.h>
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <time.h>

#define MAX_LAYERS 16
#define ROULETTE_WEIGHT 1.0e-4
#define ROULETTE_CHANCE 0.1
#define COS_ZERO (1.0 - 1.0e-12)
#define COS_90 1.0e-6
#define NR 100
#define NZ 100
#define NA 30
#define DR_MM 0.05

static double a_rz[NR][NZ], r_ra[NR][NA], t_ra[NR][NA];

typedef struct {
    double z0, z1, n, mua, mus, mut, g;
} Layer;

static int n_layers;
static Layer lay[MAX_LAYERS + 2]; /* lay[0] ambient above, lay[n_layers + 1] ambient below */

static uint64_t rng_s[4];

static uint64_t splitmix(uint64_t *x) {
    uint64_t z = (*x += 0x9E3779B97F4A7C15ULL);
    z = (z ^ (z >> 30)) * 0xBF58476D1CE4E5B9ULL;
    z = (z ^ (z >> 27)) * 0x94D049BB133111EBULL;
    return z ^ (z >> 31);
}

static inline uint64_t rotl(uint64_t x, int k) { return (x << k) | (x >> (64 - k)); }

/* uniform in (0, 1) */
static inline double rnd(void) {
    uint64_t r = rng_s[0] + rng_s[3];
    uint64_t t = rng_s[1] << 17;
    rng_s[2] ^= rng_s[0];
    rng_s[3] ^= rng_s[1];
    rng_s[1] ^= rng_s[2];
    rng_s[0] ^= rng_s[3];
    rng_s[2] ^= t;
    rng_s[3] = rotl(rng_s[3], 45);
    return ((double)(r >> 11) + 0.5) * (1.0 / 9007199254740992.0);
}

/* Unpolarised Fresnel reflectance from index n1 to n2 at incidence cosine ca1; *ca2 is the transmitted
 * cosine (paper eq. 3.36). */
static double fresnel(double n1, double n2, double ca1, double *ca2) {
    if (n1 == n2) {
        *ca2 = ca1;
        return 0.0;
    }
    if (ca1 > COS_ZERO) {
        *ca2 = ca1;
        double r = (n2 - n1) / (n2 + n1);
        return r * r;
    }
    if (ca1 < COS_90) {
        *ca2 = 0.0;
        return 1.0;
    }
    double sa1 = sqrt(1.0 - ca1 * ca1);
    double sa2 = n1 * sa1 / n2;
    if (sa2 >= 1.0) {
        *ca2 = 0.0;
        return 1.0;
    }
    double c2 = sqrt(1.0 - sa2 * sa2);
    *ca2 = c2;
    double rs = (n1 * ca1 - n2 * c2) / (n1 * ca1 + n2 * c2);
    double rp = (n2 * ca1 - n1 * c2) / (n2 * ca1 + n1 * c2);
    return 0.5 * (rs * rs + rp * rp);
}

static double spin_theta(double g) {
    if (fabs(g) < 1.0e-6) return 2.0 * rnd() - 1.0;
    double t = (1.0 - g * g) / (1.0 - g + 2.0 * g * rnd());
    double c = (1.0 + g * g - t * t) / (2.0 * g);
    return c < -1.0 ? -1.0 : (c > 1.0 ? 1.0 : c);
}

int main(int argc, char **argv) {
    if (argc < 3) {
        fprintf(stderr, "usage: %s LAYERS_FILE PHOTONS [SEED [grid]]\n", argv[0]);
        return 2;
    }
    FILE *f = fopen(argv[1], "r");
    if (!f) {
        fprintf(stderr, "cannot open %s\n", argv[1]);
        return 2;
    }
    double n_above, n_below;
    if (fscanf(f, "%lf %lf", &n_above, &n_below) != 2) {
        fprintf(stderr, "%s: first line must be 'n_above n_below'\n", argv[1]);
        return 2;
    }
    double z = 0.0;
    n_layers = 0;
    for (;;) {
        double d, n, mua, mus, g;
        int k = fscanf(f, "%lf %lf %lf %lf %lf", &d, &n, &mua, &mus, &g);
        if (k != 5) break;
        if (n_layers == MAX_LAYERS || d <= 0.0 || mua + mus <= 0.0) {
            fprintf(stderr, "%s: layer %d: too many layers, thickness <= 0 or mu_t <= 0\n", argv[1], n_layers);
            return 2;
        }
        Layer *L = &lay[++n_layers];
        L->z0 = z;
        L->z1 = z + d;
        z += d;
        L->n = n;
        L->mua = mua;
        L->mus = mus;
        L->mut = mua + mus;
        L->g = g;
    }
    fclose(f);
    if (n_layers == 0) {
        fprintf(stderr, "%s: no layers\n", argv[1]);
        return 2;
    }
    lay[0].n = n_above;
    lay[n_layers + 1].n = n_below;
    long long photons = atoll(argv[2]);
    uint64_t seed = argc > 3 ? strtoull(argv[3], NULL, 10) : 1;
    int grid = argc > 4 && argv[4][0] == 'g';
    double inv_dr = 1.0 / DR_MM, inv_dz = NZ / z, inv_da = NA / (0.5 * M_PI);
    for (int i = 0; i < 4; i++) rng_s[i] = splitmix(&seed);

    double r0 = (lay[1].n - n_above) / (lay[1].n + n_above);
    double rsp = r0 * r0;
    double rd = 0.0, rd2 = 0.0, tt = 0.0, tt2 = 0.0;
    struct timespec t0, t1;
    clock_gettime(CLOCK_MONOTONIC, &t0);
    for (long long p = 0; p < photons; p++) {
        /* launch */
        double x = 0.0, y = 0.0, zz = 0.0, ux = 0.0, uy = 0.0, uz = 1.0, w = 1.0 - rsp;
        int layer = 1;
        double sleft = 0.0; /* dimensionless step left over after a boundary */
        double w_top = 0.0, w_bot = 0.0;
        int alive = 1;
        while (alive) {
            Layer *L = &lay[layer];
            /* hop: step size in this layer */
            double s;
            if (sleft == 0.0) {
                s = -log(rnd()) / L->mut;
            } else {
                s = sleft / L->mut;
                sleft = 0.0;
            }
            /* distance to the boundary along the direction */
            double db = 1.0e300;
            if (uz > 0.0) db = (L->z1 - zz) / uz;
            else if (uz < 0.0) db = (L->z0 - zz) / uz;
            if (s > db) {
                /* hit boundary: move to it, keep the rest of the step, cross or reflect */
                sleft = (s - db) * L->mut;
                x += db * ux;
                y += db * uy;
                zz += db * uz;
                int next = uz > 0.0 ? layer + 1 : layer - 1;
                double ca2;
                double r = fresnel(L->n, lay[next].n, fabs(uz), &ca2);
                if (rnd() <= r) {
                    uz = -uz; /* internal reflection */
                } else if (next == 0 || next == n_layers + 1) {
                    if (next == 0) w_top += w;
                    else w_bot += w;
                    alive = 0;
                    if (grid) {
                        int ir = (int)(sqrt(x * x + y * y) * inv_dr);
                        int ia = (int)(acos(ca2) * inv_da);
                        if (ir >= NR) ir = NR - 1;
                        if (ia >= NA) ia = NA - 1;
                        if (next == 0) r_ra[ir][ia] += w;
                        else t_ra[ir][ia] += w;
                    }
                } else {
                    double ratio = L->n / lay[next].n;
                    ux *= ratio;
                    uy *= ratio;
                    uz = uz > 0.0 ? ca2 : -ca2;
                    layer = next;
                }
                continue;
            }
            x += s * ux;
            y += s * uy;
            zz += s * uz;
            /* drop */
            double dw = w * L->mua / L->mut;
            w -= dw;
            if (grid) {
                int ir = (int)(sqrt(x * x + y * y) * inv_dr);
                int iz = (int)(zz * inv_dz);
                if (ir >= NR) ir = NR - 1;
                if (iz >= NZ) iz = NZ - 1;
                a_rz[ir][iz] += dw;
            }
            /* spin */
            double ct = spin_theta(L->g);
            double st = sqrt(1.0 - ct * ct);
            double psi = 2.0 * M_PI * rnd();
            double cp = cos(psi);
            double sp = sin(psi);
            if (fabs(uz) > COS_ZERO) {
                ux = st * cp;
                uy = st * sp;
                uz = ct * (uz >= 0.0 ? 1.0 : -1.0);
            } else {
                double tmp = sqrt(1.0 - uz * uz);
                double nux = st * (ux * uz * cp - uy * sp) / tmp + ux * ct;
                double nuy = st * (uy * uz * cp + ux * sp) / tmp + uy * ct;
                uz = -st * cp * tmp + uz * ct;
                ux = nux;
                uy = nuy;
            }
            /* roulette */
            if (w < ROULETTE_WEIGHT) {
                if (rnd() <= ROULETTE_CHANCE) w /= ROULETTE_CHANCE;
                else alive = 0;
            }
        }
        rd += w_top;
        rd2 += w_top * w_top;
        tt += w_bot;
        tt2 += w_bot * w_bot;
    }
    clock_gettime(CLOCK_MONOTONIC, &t1);
    double el = (double)(t1.tv_sec - t0.tv_sec) + 1.0e-9 * (double)(t1.tv_nsec - t0.tv_nsec);
    double n = (double)photons;
    double mrd = rd / n, mtt = tt / n;
    printf("Rsp %.9f\n", rsp);
    printf("Rd %.9f %.9f\n", mrd, sqrt(fmax(0.0, rd2 / n - mrd * mrd) / n));
    printf("Tt %.9f %.9f\n", mtt, sqrt(fmax(0.0, tt2 / n - mtt * mtt) / n));
    printf("photons %lld\n", photons);
    printf("elapsed_s %.6f\n", el);
    if (grid) {
        double sa = 0.0, sr = 0.0, st = 0.0;
        for (int i = 0; i < NR; i++) {
            for (int k = 0; k < NZ; k++) sa += a_rz[i][k];
            for (int k = 0; k < NA; k++) {
                sr += r_ra[i][k];
                st += t_ra[i][k];
            }
        }
        printf("grid_sums A %.9f Rd %.9f Tt %.9f\n", sa / n, sr / n, st / n);
    }
    return 0;
}
