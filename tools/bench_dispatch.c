/* coexist benchmark: work units per second through the coordinator, with cells that do no work
 * (a test double fills each result from its cell index), so that only dispatch, journals and
 * cube writes are measured. Run under mpirun, e.g. `mpirun -n 8 --oversubscribe bench_dispatch
 * DIR [CELLS]`; rank 0 prints the figures. Not a test: tools/bench_engine runs it.
 */
#define _POSIX_C_SOURCE 200809L
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include <mpi.h>

#include "coexist/engine.h"
#include "coexist/error.h"

typedef struct idle_state {
    int64_t cells;
} idle_state;

static int idle_create(void **out)
{
    *out = calloc(1, sizeof(idle_state));
    return *out == NULL ? CX_ERR_NOMEM : CX_OK;
}

static void idle_destroy(void **p)
{
    free(*p);
    *p = NULL;
}

static int idle_compute(void *p, const cx_study *s, const cx_plan *plan, cx_idx cell,
                        cx_cell_result *out)
{
    idle_state *st = p;
    (void)s;
    out->cell = cell;
    out->status = CX_CELL_COMPUTED;
    out->ntasks = plan->max_tasks;
    out->nruns = plan->max_runs;
    out->multifunctional = (int)(cell & 1);
    out->untrained = 0;
    out->rho_unscaled = 1.0 + 1e-6 * (double)cell;
    out->wout_norm = 2.5;
    out->wout_square_norm = 0.5;
    for (int k = 0; k < plan->max_runs; k++) {
        cx_run_metrics *m = &out->runs[k];
        m->outcome = CX_OUT_RECONSTRUCTED;
        m->attractor = 0;
        m->distance[0] = 0.01;
        m->coverage = m->roundness = m->rotation = m->period = 1.0;
        m->valid_time = m->lyapunov = NAN;
        m->stop_time = 10.0;
    }
    st->cells++;
    return CX_OK;
}

static void idle_counts(const void *p, cx_cell_counts *c)
{
    memset(c, 0, sizeof *c);
    c->solves = ((const idle_state *)p)->cells;
}

static const cx_engine_ops idle_ops = {idle_create, idle_destroy, idle_compute, idle_counts, NULL};

int main(int argc, char **argv)
{
    int provided, rank, size, rc = CX_OK;
    MPI_Init_thread(&argc, &argv, MPI_THREAD_FUNNELED, &provided);
    MPI_Comm_rank(MPI_COMM_WORLD, &rank);
    MPI_Comm_size(MPI_COMM_WORLD, &size);
    const char *dir = argc > 1 ? argv[1] : "/tmp";
    long cells = argc > 2 ? atol(argv[2]) : 100000;
    int computes = argc > 3 ? atoi(argv[3]) : -1; /* -1 auto, 0 no, 1 yes */
    cx_plan *plan = NULL;
    double *v = calloc((size_t)cells, sizeof(double));
    for (long k = 0; k < cells; k++)
        v[k] = (double)k;
    rc = cx_plan_create("dispatch-bench", 1, 1, "bench.cells: many\n", &plan);
    if (rc == CX_OK)
        rc = cx_plan_add_axis(plan, "item", "1", cells, v);
    if (rc == CX_OK)
        rc = cx_plan_alloc_keys(plan);
    for (long c = 0; rc == CX_OK && c < cells; c++) {
        plan->network_key[c] = (uint64_t)(c / 16) + 1; /* groups of 16 units */
        plan->drive_key[c] = (uint64_t)c + 1;          /* one cell per unit */
        plan->cost_shared[c] = 1.0;
        plan->cost_own[c] = 0.0;
    }
    for (int mode = 0; rc == CX_OK && mode < 2; mode++) {
        char path[1024];
        snprintf(path, sizeof path, "%s/dispatch-%d.h5", dir, mode);
        cx_engine_opts o;
        cx_engine_stats st;
        cx_engine_opts_default(&o);
        o.cube = path;
        o.fresh = 1;
        o.quiet = 1;
        o.checkpoint_seconds = 5.0;
        o.max_units_per_batch = mode == 0 ? 1 : 0;
        o.coordinator_computes = computes;
        rc = cx_engine_run(MPI_COMM_WORLD, plan, NULL, &idle_ops, &o, &st);
        if (rc == CX_OK && rank == 0)
            printf("dispatch, %d ranks, %s: %lld units in %lld batches in %.3f s = %.0f units/s "
                   "(coordinator CPU %.1f %% of wall; rank 0 computes: %s)\n",
                   size, mode == 0 ? "one unit per batch" : "batches sized by cost (factoring)",
                   (long long)st.units, (long long)st.batches, st.wall, (double)st.units / st.wall,
                   100.0 * st.rank0_cpu / st.wall, st.coordinator_computes ? "yes" : "no");
    }
    if (rc != CX_OK && rank == 0)
        cx_err_print("bench_dispatch", 1);
    cx_plan_destroy(&plan);
    free(v);
    MPI_Finalize();
    return rc == CX_OK ? 0 : 1;
}
