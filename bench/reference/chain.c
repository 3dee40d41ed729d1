/*
 * Reference implementations in C of the pipeline's chain on a quiet block, for `npm run bench -- --reference`:
 * correction u = ux·x + u0, v = vx·x + vy·y + v0; level √(u² + v²) stored as float with the low-signal and
 * full-scale checks as flag bits; the phase atan2(v, u); unwrapping into whole turns; the alpha-beta velocity
 * loop; position and velocity in metres. Blocks of 4096 samples, outputs per block as the pipeline writes them.
 *
 *   plain       one loop per sample, libm atan2, built with -O3 for generic x86-64 (what a plain port gives)
 *   vectorised  the per-sample part (correction, level, flags, a degree-17 polynomial atan2 as fastAtan2 in
 *               src/core/phase.ts, branch-free) in its own loop, which gcc vectorises with -O3 -march=native,
 *               then the unwrapping, loop and displacement recurrence in a scalar loop
 *
 * Usage: chain VARIANT SIGNAL_FILE SAMPLES ux u0 vx vy v0 minLevel low high alpha beta perFringe perRad perStep
 * SIGNAL_FILE holds SAMPLES int16 x codes, then SAMPLES int16 y codes (native byte order). Prints one JSON
 * object: CPU seconds per pass (median of 15 after 5 warm-up passes) and a checksum of the last pass.
 */
#include <math.h>
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <time.h>

#define BLOCK 4096
#define WARMUP 5
#define PASSES 15

static double ux, u0, vx, vy, v0, min_level, low, high, alpha, beta, per_fringe, per_rad, per_step;
static double position[BLOCK], velocity[BLOCK], phase[BLOCK];
static float level[BLOCK];
static uint8_t flags[BLOCK];

struct state { double last, turns, w, lag; };

static void plain_block(const int16_t *x, const int16_t *y, int n, struct state *s) {
  const double pi = M_PI, two_pi = 2 * M_PI;
  double last = s->last, turns = s->turns, w = s->w, lag = s->lag;
  for (int i = 0; i < n; i++) {
    const double xi = x[i], yi = y[i];
    const double u = ux * xi + u0;
    const double v = vx * xi + vy * yi + v0;
    const double lev = sqrt(u * u + v * v);
    level[i] = (float)lev;
    flags[i] = (uint8_t)((lev >= min_level ? 0 : 1) | (xi <= low || xi >= high || yi <= low || yi >= high ? 2 : 0));
    const double theta = atan2(v, u);
    double d = theta - last;
    if (d > pi) { d -= two_pi; turns -= 1; } else if (d <= -pi) { d += two_pi; turns += 1; }
    last = theta;
    const double residual = d - lag - w;
    w += beta * residual;
    lag = (alpha - 1) * residual;
    position[i] = turns * per_fringe + theta * per_rad;
    velocity[i] = w * per_step;
  }
  s->last = last; s->turns = turns; s->w = w; s->lag = lag;
}

static inline double poly_atan2(double y, double x) {
  const double ax = fabs(x), ay = fabs(y);
  const int swap = ay > ax;
  const double big = swap ? ay : ax, small = swap ? ax : ay;
  const double t = small / (big == 0 ? 1 : big); /* 0 when both are 0 */
  const double s = t * t, s2 = s * s, s4 = s2 * s2;
  double r = t * (0.9999998863890917 + s * -0.3333259705438864 + s2 * (0.1998590712848943 + s * -0.1416123150897566) +
                  s4 * (0.10498954015264128 + s * -0.07234872864896962 + s2 * (0.03978139592708155 + s * -0.014401459520919384) +
                        s4 * 0.002456749204230781));
  r = swap ? M_PI / 2 - r : r;
  r = x < 0 ? M_PI - r : r;
  return y < 0 ? -r : r;
}

static void vectorised_block(const int16_t *restrict x, const int16_t *restrict y, int n, struct state *s) {
  for (int i = 0; i < n; i++) {
    const double xi = x[i], yi = y[i];
    const double u = ux * xi + u0;
    const double v = vx * xi + vy * yi + v0;
    const double lev = sqrt(u * u + v * v);
    level[i] = (float)lev;
    flags[i] = (uint8_t)(!(lev >= min_level) | (((xi <= low) | (xi >= high) | (yi <= low) | (yi >= high)) << 1));
    phase[i] = poly_atan2(v, u);
  }
  const double pi = M_PI, two_pi = 2 * M_PI;
  double last = s->last, turns = s->turns, w = s->w, lag = s->lag;
  for (int i = 0; i < n; i++) {
    const double theta = phase[i];
    double d = theta - last;
    if (d > pi) { d -= two_pi; turns -= 1; } else if (d <= -pi) { d += two_pi; turns += 1; }
    last = theta;
    const double residual = d - lag - w;
    w += beta * residual;
    lag = (alpha - 1) * residual;
    position[i] = turns * per_fringe + theta * per_rad;
    velocity[i] = w * per_step;
  }
  s->last = last; s->turns = turns; s->w = w; s->lag = lag;
}

static double cpu_seconds(void) {
  struct timespec ts;
  clock_gettime(CLOCK_PROCESS_CPUTIME_ID, &ts);
  return ts.tv_sec + ts.tv_nsec * 1e-9;
}

static int compare(const void *a, const void *b) {
  const double x = *(const double *)a, y = *(const double *)b;
  return (x > y) - (x < y);
}

int main(int argc, char **argv) {
  if (argc != 17) {
    fprintf(stderr, "usage: %s plain|vectorised SIGNAL_FILE SAMPLES ux u0 vx vy v0 minLevel low high alpha beta perFringe perRad perStep\n", argv[0]);
    return 2;
  }
  const int vectorised = strcmp(argv[1], "vectorised") == 0;
  if (!vectorised && strcmp(argv[1], "plain") != 0) { fprintf(stderr, "unknown variant %s\n", argv[1]); return 2; }
  const long samples = atol(argv[3]);
  double *params[] = { &ux, &u0, &vx, &vy, &v0, &min_level, &low, &high, &alpha, &beta, &per_fringe, &per_rad, &per_step };
  for (int k = 0; k < 13; k++) *params[k] = strtod(argv[4 + k], NULL);
  int16_t *x = malloc(2 * samples * sizeof(int16_t));
  FILE *file = fopen(argv[2], "rb");
  if (x == NULL || file == NULL || fread(x, sizeof(int16_t), 2 * samples, file) != (size_t)(2 * samples)) {
    fprintf(stderr, "cannot read %ld samples of x and y from %s\n", samples, argv[2]);
    return 1;
  }
  fclose(file);
  const int16_t *y = x + samples;
  double seconds[PASSES];
  double checksum = 0;
  for (int pass = 0; pass < WARMUP + PASSES; pass++) {
    struct state s = { 0, 0, 0, 0 };
    checksum = 0;
    const double start = cpu_seconds();
    for (long b = 0; b + BLOCK <= samples; b += BLOCK) {
      if (vectorised) vectorised_block(x + b, y + b, BLOCK, &s);
      else plain_block(x + b, y + b, BLOCK, &s);
      checksum += position[BLOCK - 1] + velocity[BLOCK - 1] + level[BLOCK - 1] + flags[BLOCK - 1];
    }
    if (pass >= WARMUP) seconds[pass - WARMUP] = cpu_seconds() - start;
  }
  qsort(seconds, PASSES, sizeof(double), compare);
  printf("{\"secondsPerPass\":%.9g,\"checksum\":%.17g}\n", seconds[PASSES / 2], checksum);
  free(x);
  return 0;
}
