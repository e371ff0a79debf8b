/* level_profile.c: where an all-levels call of the C core spends its potential evaluations and CPU time.
 *
 * For the wells of bench_wkb.py (invented test wells): the evaluations of the well set-up (the scan and
 * minimum, the quadrature rule check), of the threshold orbit (vD) and of the levels, the orbits of the
 * levels, and the CPU time of each phase (process CPU time, the mean over repeated calls). Evaluations
 * are counted by a copy of the model's descriptor whose eval counts its calls (a private counter: this
 * program is single-threaded).
 * Build and run from the repository root (against this tree's csrc/, without the Python binding):
 *   gcc -O2 -std=gnu99 -Icsrc -o /tmp/level_profile tests/benchmarks/level_profile.c \
 *       $(find csrc -name '*.c' ! -name module.c) $(pkg-config --cflags --libs gsl) -lm -lpthread
 *   /tmp/level_profile [repetitions, default 10000; 0: counts only]
 */
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <time.h>

#include "wkb.h"
#include "well.h"

static long n_eval;
static const wkb_model *base_model;
static wkb_model counting_model;

static void counting_eval(const wkb_potential *pot, double r, wkb_pot_value *out)
{
    n_eval++;
    base_model->eval(pot, r, out);
}

static double cpu_seconds(void)
{
    struct timespec t;
    clock_gettime(CLOCK_PROCESS_CPUTIME_ID, &t);
    return (double)t.tv_sec + 1e-9 * (double)t.tv_nsec;
}

static void profile(const char *name, const char *model, const double *p, double mu, int reps)
{
    wkb_potential pot, counted;
    wkb_error err;
    base_model = wkb_model_by_name(model);
    if (!base_model || wkb_potential_init(&pot, base_model, p, NULL, &err)) {
        printf("%s: cannot set up the model\n", name);
        return;
    }
    counting_model = *base_model;
    counting_model.eval = counting_eval;
    counted = pot;
    counted.model = &counting_model;
    wkb_settings s = wkb_default_settings();
    s.check_nodes = 1; /* as levels() */
    wkb_well *w = wkb_well_alloc(&s), *w_plain = NULL;
    s.check_nodes = 0;
    w_plain = wkb_well_alloc(&s);
    wkb_level *lv = calloc(100000, sizeof *lv);
    size_t count = 0;
    double vD;
    if (!w || !w_plain || !lv)
        goto done;
    n_eval = 0;
    wkb_well_set(w_plain, &counted, mu, 0, 1, 1, &err);
    const long e_scan = n_eval;
    n_eval = 0;
    if (wkb_well_set(w, &counted, mu, 0, 1, 1, &err))
        goto done;
    const long e_set = n_eval;
    wkb_level_count(w, &count, &vD, &err);
    const long e_vD = n_eval - e_set;
    const size_t orbits0 = wkb_well_orbits(w);
    const int status = wkb_all_levels(w, lv, count, &count, &vD, &err);
    const long e_levels = n_eval - e_set - e_vD;
    printf("%-10s %3zu levels, %3zu nodes: evaluations set-up %ld (scan and minimum %ld, rule check %ld), vD %ld, "
           "levels %ld (%.1f a level), orbits %zu%s\n", name, count, w->set.nodes, e_set, e_scan, e_set - e_scan,
           e_vD, e_levels, (double)e_levels / (double)count, wkb_well_orbits(w) - orbits0, status ? " FAILED" : "");
    if (reps <= 0 || status)
        goto done;
    double t0 = cpu_seconds();
    for (int i = 0; i < reps; i++)
        wkb_well_set(w, &pot, mu, 0, 1, 1, &err);
    const double t_set = (cpu_seconds() - t0) / reps;
    t0 = cpu_seconds();
    for (int i = 0; i < reps; i++) {
        wkb_well_set(w, &pot, mu, 0, 1, 1, &err);
        wkb_level_count(w, &count, &vD, &err);
    }
    const double t_vD = (cpu_seconds() - t0) / reps - t_set;
    t0 = cpu_seconds();
    for (int i = 0; i < reps; i++) {
        wkb_well_set(w, &pot, mu, 0, 1, 1, &err);
        wkb_all_levels(w, lv, count, &count, &vD, &err);
    }
    const double t_all = (cpu_seconds() - t0) / reps;
    printf("           CPU us: set-up %.2f, vD %.2f, levels %.2f, call %.2f = %.3f us a level\n", 1e6 * t_set,
           1e6 * t_vD, 1e6 * (t_all - t_set - t_vD), 1e6 * t_all, 1e6 * t_all / (double)count);
done:
    free(lv);
    wkb_well_free(w);
    wkb_well_free(w_plain);
}

int main(int argc, char **argv)
{
    wkb_init_library();
    const int reps = argc > 1 ? atoi(argv[1]) : 10000;
    /* the wells of bench_wkb.py (invented), their parameters in the core's order */
    const double wexe = 52.8186, we = 2990.946, mu_hcl = 0.979592539;
    const double morse_hcl[3] = {we * we / (4 * wexe), 1.27455, sqrt(wexe * mu_hcl / WKB_HBAR2_OVER_2U)};
    const double lj126[4] = {4000, 4, 12, 6}, lj106[4] = {6000, 3.5, 10, 6}, morse115[3] = {9000, 2.5, 0.9};
    const double emo[5] = {3000, 3, 3, 1, 0.1};
    const double mlr[11] = {3000, 3, 2e5, 0, 0, 5, 3, 3, 0.3, 0.1, 0.05};
    const double mlr_deep[10] = {12000, 3, 6e5, 0, 0, 5, 3, 3, 0.2, 0.05};
    const double mlr_damped[15] = {5000, 3.2, 3e5, 1e5, 2e6, 0, 0, 5, 3, 3.2, 2, 0.8, -2, 0.2, 0.1};
    profile("H35Cl", "morse", morse_hcl, mu_hcl, reps);
    profile("LJ(12,6)", "lennard_jones", lj126, 20, reps / 3);
    profile("LJ(10,6)", "lennard_jones", lj106, 25, reps / 3);
    profile("Morse 115", "morse", morse115, 20, reps / 4);
    profile("EMO", "emo2", emo, 30, reps / 4);
    profile("MLR", "mlr3", mlr, 30, reps / 4);
    profile("MLR deep", "mlr2", mlr_deep, 40, reps / 8);
    profile("MLR damp", "mlrd2", mlr_damped, 30, reps / 20);
    return 0;
}
