/* coexist engine: the coordinator and the workers of a sweep.
 *
 * Rank 0 coordinates: it hands out batches of work units (units.c) and takes back small
 * acknowledgements. It never spins a core: it polls with MPI_Test and sleeps 200 us between
 * polls when nothing arrived (a blocking receive busy-polls in Open MPI and cost about 40 % of
 * the throughput with 3 ranks on 2 cores; PLATFORM.md), doubling the sleep up to 5 ms while
 * nothing arrives (binary exponential backoff: Metcalfe & Boggs 1976, "Ethernet: distributed
 * packet switching for local computer networks", Commun. ACM 19(7), 395-404). Each worker holds up
 * to CX_ENGINE_DEPTH batches, the one it computes and the rest in reserve, so it never waits for
 * the coordinator (prefetch, as in double buffering); the reserve shrinks to one batch when few
 * units are left, so that little work is stranded on one worker at the end. Measured with cells
 * that do no work, 8 ranks on 2 cores, one unit per message: about 20,000 units/s with depth 2,
 * 26,000-46,000 with depth 4 (tools/bench_engine). When rank 0 also computes (always with one rank;
 * by default when the ranks on its node do not outnumber the cores), the computing runs in a second
 * thread of rank 0 that makes no MPI call (MPI_THREAD_FUNNELED) and talks to the coordinator
 * through a mutex-protected queue.
 *
 * Results never travel: each rank appends its cells to its own journal (journal.c), fsyncs it
 * at checkpoints, and writes its cells into the cube with independent writes (cube.c). The
 * coordinator learns only how many cells of each status a batch produced. A result depends only
 * on the study and the cell (cx_cell_compute is deterministic), never on the rank, the order or
 * a restart, so the result datasets are the same bytes for any rank count.
 *
 * Shards (shards.c) run the same way on a share of the cells and write only journals; a merge
 * computes nothing and replays every journal into the cube. A stop request (a signal before a
 * batch system's time limit) ends the hand-out at once; cells being computed may finish within
 * a grace period, after which a watchdog thread leaves them (they stay not done) and ends the
 * process with the incomplete exit status, because a cell cannot be interrupted safely
 * midway and the batch system's kill follows soon after (PLATFORM.md measured 3-24 s).
 */
#define _GNU_SOURCE
#include <dirent.h>
#include <errno.h>
#include <fcntl.h>
#include <math.h>
#include <pthread.h>
#include <signal.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>
#include <time.h>
#include <unistd.h>

#include <mpi.h>

#include "coexist/clock.h"
#include "coexist/engine.h"
#include "coexist/error.h"

#define MAX_BATCH_CELLS 1024            /* cells per batch message (units are cut to fit) */
#define DEPTH           CX_ENGINE_DEPTH /* batches a worker holds: one computing, the rest in reserve */
#define TAG_WORK        41
#define TAG_DONE        42
#define DONE_LEN        11 /* seq, cells, error flag, status counts [8] */
#define POLL_NS         200000L
#define POLL_MAX_NS     5000000L
#define WORKER_POLL_NS  100000L
#define PENDING_MAX     4096 /* records held before a cube write is forced */

static volatile sig_atomic_t stop_requested;

void cx_engine_request_stop(void)
{
    stop_requested = 1;
}

void cx_engine_opts_default(cx_engine_opts *o)
{
    memset(o, 0, sizeof *o);
    o->checkpoint_seconds = 10.0;
    o->progress_seconds = 10.0;
    o->coordinator_computes = -1;
    /* Assumed sustained rate of one core on this kind of work (sparse products, tanh, small
     * dense solves): an assumption for the estimate, not a measurement. */
    o->flop_rate = CX_ASSUMED_FLOP_RATE;
    o->blas_threads = 1;
    o->grace_seconds = 60.0;
}

static void nap(long ns)
{
    struct timespec ts = {0, ns};
    nanosleep(&ts, NULL);
}

static int mpi_check(int e, const char *what)
{
    if (e == MPI_SUCCESS)
        return CX_OK;
    char msg[MPI_MAX_ERROR_STRING];
    int len = 0;
    MPI_Error_string(e, msg, &len);
    return CX_FAIL(CX_ERR_MPI, "MPI: %s failed: %s", what, msg);
}

#define MPI_TRY(call) CX_TRY(mpi_check((call), #call))

/* All ranks agree whether any failed (FFTW's any-true), so no rank enters a collective
 * alone. Returns CX_OK on every rank or the local code / CX_ERR_MPI on every rank. */
static int agree(MPI_Comm comm, int rc)
{
    int bad = rc != CX_OK, any = 0;
    if (MPI_Allreduce(&bad, &any, 1, MPI_INT, MPI_LOR, comm) != MPI_SUCCESS)
        return CX_FAIL(CX_ERR_MPI, "MPI_Allreduce failed while agreeing on an error");
    if (any && rc == CX_OK)
        return CX_FAIL(CX_ERR_MPI, "another rank failed (see its messages)");
    return rc;
}

/* Everything one computing thread needs. */
typedef struct computer {
    const cx_plan *plan;
    const cx_study *study;
    const cx_engine_ops *ops;
    void *state;
    cx_journal *journal;
    int rank;
    size_t rs;
    unsigned char *record;
    cx_cell_result *result;
    /* Records not yet in the cube. On rank 0 shared with the coordinator under `lock`. */
    unsigned char *pending;
    cx_idx npending;
    pthread_mutex_t *lock;
    double checkpoint_seconds;
    double last_sync;
    double compute_seconds;
    double write_seconds;
    cx_cube *cube;    /* NULL on rank 0's computing thread: the coordinator writes for it */
    int journal_only; /* shard mode: no cube, records go only to the journal */
} computer;

static int computer_checkpoint(computer *w)
{
    int rc = CX_OK;
    double t0 = cx_clock_mono();
    CX_TRY(cx_journal_sync(w->journal));
    if (w->cube != NULL) {
        CX_TRY(cx_cube_write_records(w->cube, w->pending, w->npending));
        w->npending = 0;
    }
    w->last_sync = cx_clock_mono();
    w->write_seconds += w->last_sync - t0;
done:
    return rc;
}

static int fflush_journal(computer *w)
{
    return cx_journal_flush(w->journal);
}

/* Journal the encoded record w->record and queue it for the cube. */
static int record_cell(computer *w)
{
    int rc = CX_OK;
    double t1 = cx_clock_mono();
    CX_TRY(cx_journal_append(w->journal, w->record));
    /* After a stop request the grace watchdog may end the process at any moment: hand
     * each record to the operating system as soon as it exists. */
    if (stop_requested)
        CX_TRY(cx_journal_flush(w->journal));
    if (w->journal_only) {
        w->write_seconds += cx_clock_mono() - t1;
        if (cx_clock_mono() - w->last_sync >= w->checkpoint_seconds)
            CX_TRY(computer_checkpoint(w));
        return CX_OK;
    }
    if (w->lock != NULL)
        pthread_mutex_lock(w->lock);
    memcpy(w->pending + (size_t)w->npending * w->rs, w->record, w->rs);
    w->npending++;
    int full = w->npending >= PENDING_MAX;
    if (w->lock != NULL)
        pthread_mutex_unlock(w->lock);
    w->write_seconds += cx_clock_mono() - t1;
    if (full && w->cube == NULL) {
        /* Rank 0's thread waits for the coordinator to drain its records. */
        for (;;) {
            pthread_mutex_lock(w->lock);
            full = w->npending >= PENDING_MAX;
            pthread_mutex_unlock(w->lock);
            if (!full)
                break;
            nap(POLL_NS);
        }
    }
    if ((w->cube != NULL && full) || cx_clock_mono() - w->last_sync >= w->checkpoint_seconds)
        CX_TRY(computer_checkpoint(w));
done:
    return rc;
}

/* Compute a batch; counts[status] += cells of that status. A stop request (a signal) ends
 * the batch early: the cells not computed stay not done and a rerun computes them.
 * OUT: *ndone. */
static int compute_batch(computer *w, const int64_t *cells, cx_idx n, int64_t *counts,
                         int64_t *ndone)
{
    int rc = CX_OK;
    *ndone = 0;
    for (cx_idx i = 0; i < n && !stop_requested;) {
        /* a group of cells that share their closed-loop block, or one cell */
        int used = 1;
        double t0 = cx_clock_mono();
        if (w->ops->compute_group != NULL) {
            int want = n - i < CX_CELL_GROUP ? (int)(n - i) : CX_CELL_GROUP;
            CX_TRY(w->ops->compute_group(w->state, w->study, w->plan, cells + i, want, w->result,
                                         &used));
            CX_REQUIRE(used >= 1 && used <= want, CX_ERR_INVALID,
                       "engine: a cell group reported %d cells of %d", used, want);
        } else {
            CX_TRY(w->ops->compute(w->state, w->study, w->plan, cells[i], w->result));
        }
        double t1 = cx_clock_mono();
        w->compute_seconds += t1 - t0;
        for (int g = 0; g < used; g++, i++) {
            const cx_cell_result *res = &w->result[g];
            int s = res->status;
            counts[s >= 0 && s < 8 ? s : 0]++;
            /* a group's wall time is shared out evenly over its cells */
            cx_record_encode(res, (t1 - t0) / (double)used, cx_clock_wall(), w->rank,
                             w->plan->max_runs, w->plan->max_tasks, w->record);
            CX_TRY(record_cell(w));
            (*ndone)++;
        }
    }
done:
    return rc;
}

static int computer_init(computer *w, const cx_plan *plan, const cx_study *study,
                         const cx_engine_ops *ops, const cx_engine_opts *o, int rank,
                         const char *jpath)
{
    int rc = CX_OK;
    memset(w, 0, sizeof *w);
    w->plan = plan;
    w->study = study;
    w->ops = ops;
    w->rank = rank;
    w->rs = cx_record_size(plan->max_runs, plan->max_tasks);
    w->checkpoint_seconds = o->checkpoint_seconds;
    w->last_sync = cx_clock_mono();
    CX_ALLOC(w->record, w->rs);
    CX_ALLOC(w->result, CX_CELL_GROUP);
    CX_ALLOC(w->pending, (size_t)PENDING_MAX * w->rs);
    CX_TRY(ops->create(&w->state));
    CX_TRY(cx_journal_open(jpath, plan->hash, rank, plan->max_runs, plan->max_tasks, &w->journal));
done:
    return rc;
}

static int computer_free(computer *w)
{
    int rc = cx_journal_close(&w->journal);
    if (w->state != NULL)
        w->ops->destroy(&w->state);
    free(w->record);
    free(w->result);
    free(w->pending);
    w->record = w->pending = NULL;
    w->result = NULL;
    return rc;
}

/* Rank 0's computing thread and its two-slot inbox. */
typedef struct local_worker {
    computer comp;
    pthread_t thread;
    pthread_mutex_t lock;
    pthread_cond_t cond;
    int64_t *slot[DEPTH];
    cx_idx slot_n[DEPTH];
    int64_t slot_seq[DEPTH];
    int head, count; /* inbox ring */
    int stop;
    /* acknowledgements for the coordinator */
    int64_t acks[DEPTH][DONE_LEN];
    int nacks;
    int failed;
} local_worker;

static void *local_main(void *arg)
{
    local_worker *lw = arg;
    int64_t *cells = cx_malloc_array(MAX_BATCH_CELLS, sizeof(int64_t));
    for (;;) {
        pthread_mutex_lock(&lw->lock);
        while (lw->count == 0 && !lw->stop)
            pthread_cond_wait(&lw->cond, &lw->lock);
        if (lw->count == 0 && lw->stop) {
            pthread_mutex_unlock(&lw->lock);
            break;
        }
        int s = lw->head;
        cx_idx n = lw->slot_n[s];
        int64_t seq = lw->slot_seq[s];
        if (cells != NULL)
            memcpy(cells, lw->slot[s], (size_t)n * sizeof(int64_t));
        pthread_mutex_unlock(&lw->lock);

        int64_t ack[DONE_LEN] = {0};
        ack[0] = seq;
        ack[1] = n;
        int rc = cells == NULL
                     ? CX_ERR_NOMEM
                     : (lw->failed ? CX_ERR_INTERNAL
                                   : compute_batch(&lw->comp, cells, n, ack + 3, &ack[1]));
        if (rc == CX_OK)
            rc = fflush_journal(&lw->comp);
        pthread_mutex_lock(&lw->lock);
        if (rc != CX_OK) {
            lw->failed = 1;
            ack[2] = 1;
        }
        lw->head = (lw->head + 1) % DEPTH;
        lw->count--;
        memcpy(lw->acks[lw->nacks++], ack, sizeof ack);
        pthread_mutex_unlock(&lw->lock);
    }
    free(cells);
    return NULL;
}

/* Coordinator state. */
typedef struct coord {
    MPI_Comm comm;
    int size;
    int computes; /* rank 0 computes through lw */
    local_worker *lw;
    cx_units *units;
    int max_units;
    int64_t *sendbuf;     /* [size][DEPTH][2 + MAX_BATCH_CELLS] */
    MPI_Request *sendreq; /* [size][DEPTH] */
    int *outstanding;
    int *next_slot;
    int *stopped;
    int active;
    int64_t seq;
    cx_idx batches, units_sent, cells_done, todo;
    int64_t by_status[8];
    int failed;
} coord;

static int64_t *slot_buf(coord *c, int w, int s)
{
    return c->sendbuf + ((size_t)w * DEPTH + (size_t)s) * (2 + MAX_BATCH_CELLS);
}

static int send_to(coord *c, int w, int64_t *msg)
{
    int rc = CX_OK;
    if (w == 0) {
        local_worker *lw = c->lw;
        pthread_mutex_lock(&lw->lock);
        int s = (lw->head + lw->count) % DEPTH;
        lw->slot_n[s] = msg[1];
        lw->slot_seq[s] = msg[0];
        memcpy(lw->slot[s], msg + 2, (size_t)msg[1] * sizeof(int64_t));
        if (msg[1] == 0)
            lw->stop = 1;
        else
            lw->count++;
        pthread_cond_signal(&lw->cond);
        pthread_mutex_unlock(&lw->lock);
        return CX_OK;
    }
    int s = c->next_slot[w];
    MPI_TRY(MPI_Isend(msg, (int)(2 + msg[1]), MPI_INT64_T, w, TAG_WORK, c->comm,
                      &c->sendreq[w * DEPTH + s]));
done:
    return rc;
}

/* How many batches a worker should hold: the full depth while plenty of units are left, else
 * two (one computing, one in reserve), so that few units are stranded in reserves at the end. */
static int target_depth(const coord *c)
{
    if (DEPTH <= 2 || cx_units_left(c->units) >= (cx_idx)c->size * DEPTH)
        return DEPTH;
    return 2;
}

/* Give worker w one batch (*gave = 1), or a stop when nothing is left and it holds none. */
static int give(coord *c, int w, int *gave)
{
    int rc = CX_OK;
    int s = c->next_slot[w];
    *gave = 0;
    if (w != 0)
        MPI_TRY(MPI_Wait(&c->sendreq[w * DEPTH + s], MPI_STATUS_IGNORE));
    int64_t *msg = slot_buf(c, w, s);
    cx_idx nunits = 0, n = 0;
    if (!c->failed && !stop_requested)
        n = cx_units_take(c->units, w, c->size, c->max_units, MAX_BATCH_CELLS, msg + 2, &nunits);
    if (n == 0) {
        if (c->outstanding[w] == 0 && !c->stopped[w]) {
            msg[0] = -1;
            msg[1] = 0;
            CX_TRY(send_to(c, w, msg));
            c->next_slot[w] = (s + 1) % DEPTH;
            c->stopped[w] = 1;
            c->active--;
        }
        goto done;
    }
    msg[0] = c->seq++;
    msg[1] = n;
    CX_TRY(send_to(c, w, msg));
    c->next_slot[w] = (s + 1) % DEPTH;
    c->outstanding[w]++;
    c->batches++;
    c->units_sent += nunits;
    *gave = 1;
done:
    return rc;
}

static int handle_ack(coord *c, int w, const int64_t *ack)
{
    int rc = CX_OK;
    c->outstanding[w]--;
    if (ack[2] != 0)
        c->failed = 1;
    else
        c->cells_done += ack[1];
    for (int k = 0; k < 8; k++)
        c->by_status[k] += ack[3 + k];
    int target = target_depth(c), gave = 1;
    while (gave && (c->outstanding[w] < target || c->outstanding[w] == 0))
        CX_TRY(give(c, w, &gave));
done:
    return rc;
}

static void fmt_hms(double s, char *out, size_t n)
{
    if (!isfinite(s) || s < 0) {
        snprintf(out, n, "--:--:--");
        return;
    }
    long t = (long)(s + 0.5);
    snprintf(out, n, "%ld:%02ld:%02ld", t / 3600, (t / 60) % 60, t % 60);
}

static void progress(const coord *c, double elapsed, int tty, int final)
{
    double rate = elapsed > 0 ? (double)c->cells_done / elapsed : 0.0;
    double eta = rate > 0 ? (double)(c->todo - c->cells_done) / rate : NAN;
    char e1[32], e2[32];
    fmt_hms(elapsed, e1, sizeof e1);
    fmt_hms(eta, e2, sizeof e2);
    if (tty) {
        int width = 30, fill = c->todo > 0 ? (int)(width * c->cells_done / c->todo) : width;
        char bar[64];
        for (int i = 0; i < width; i++)
            bar[i] = i < fill ? '#' : '.';
        bar[width] = '\0';
        fprintf(stderr, "\r[%s] %lld/%lld cells  %.3g cells/s  elapsed %s  left %s   %s", bar,
                (long long)c->cells_done, (long long)c->todo, rate, e1, e2, final ? "\n" : "");
    } else {
        fprintf(stderr, "progress: %lld/%lld cells, %.3g cells/s, elapsed %s, left %s\n",
                (long long)c->cells_done, (long long)c->todo, rate, e1, e2);
    }
    fflush(stderr);
}

/* Rank 0 with its optional computing thread. */
static int coordinate(coord *c, const cx_engine_opts *o, cx_cube *cube, double *write_seconds)
{
    int rc = CX_OK;
    int64_t ack[DONE_LEN];
    MPI_Request req = MPI_REQUEST_NULL;
    MPI_Status status;
    double t0 = cx_clock_mono(), last_print = t0, last_ckpt = t0;
    int tty = isatty(fileno(stderr)) && !o->quiet;
    unsigned char *drain = NULL;
    size_t rs = c->computes ? c->lw->comp.rs : 0;
    if (c->computes)
        CX_ALLOC(drain, (size_t)PENDING_MAX * rs);
    /* Breadth first: every worker gets its first batch before anyone gets a reserve. */
    for (int k = 0; k < DEPTH; k++)
        for (int w = c->computes ? 0 : 1; w < c->size; w++)
            if (c->outstanding[w] == k && !c->stopped[w] && (k == 0 || k < target_depth(c))) {
                int gave;
                CX_TRY(give(c, w, &gave));
            }
    if (c->size > 1)
        MPI_TRY(MPI_Irecv(ack, DONE_LEN, MPI_INT64_T, MPI_ANY_SOURCE, TAG_DONE, c->comm, &req));
    long idle_ns = POLL_NS;
    while (c->active > 0) {
        int busy = 0, flag = 0;
        if (c->size > 1) {
            MPI_TRY(MPI_Test(&req, &flag, &status));
            if (flag) {
                int64_t copy[DONE_LEN];
                memcpy(copy, ack, sizeof copy);
                MPI_TRY(
                    MPI_Irecv(ack, DONE_LEN, MPI_INT64_T, MPI_ANY_SOURCE, TAG_DONE, c->comm, &req));
                CX_TRY(handle_ack(c, status.MPI_SOURCE, copy));
                busy = 1;
            }
        }
        if (c->computes) {
            int64_t local[DEPTH][DONE_LEN];
            int na;
            pthread_mutex_lock(&c->lw->lock);
            na = c->lw->nacks;
            memcpy(local, c->lw->acks, sizeof local);
            c->lw->nacks = 0;
            pthread_mutex_unlock(&c->lw->lock);
            for (int k = 0; k < na; k++)
                CX_TRY(handle_ack(c, 0, local[k]));
            busy |= na > 0;
        }
        double t = cx_clock_mono();
        if (c->computes) {
            cx_idx n = 0;
            pthread_mutex_lock(&c->lw->lock);
            if (t - last_ckpt >= o->checkpoint_seconds || c->active == 0 ||
                c->lw->comp.npending >= PENDING_MAX / 2) {
                n = c->lw->comp.npending;
                memcpy(drain, c->lw->comp.pending, (size_t)n * rs);
                c->lw->comp.npending = 0;
                last_ckpt = t;
            }
            pthread_mutex_unlock(&c->lw->lock);
            if (n > 0 && cube != NULL) {
                double w0 = cx_clock_mono();
                CX_TRY(cx_cube_write_records(cube, drain, n));
                *write_seconds += cx_clock_mono() - w0;
            }
        }
        if (!o->quiet && t - last_print >= (tty ? 0.5 : o->progress_seconds)) {
            progress(c, t - t0, tty, 0);
            last_print = t;
        }
        /* Back off while idle: every worker holds a batch in reserve, so an answer within a
         * few milliseconds costs no throughput, and far fewer wake-ups cost less CPU. */
        if (busy) {
            idle_ns = POLL_NS;
        } else {
            nap(idle_ns);
            idle_ns = idle_ns * 2 > POLL_MAX_NS ? POLL_MAX_NS : idle_ns * 2;
        }
    }
    if (!o->quiet)
        progress(c, cx_clock_mono() - t0, tty, 1);
done:
    if (req != MPI_REQUEST_NULL) {
        MPI_Cancel(&req);
        MPI_Wait(&req, MPI_STATUS_IGNORE);
    }
    free(drain);
    return rc;
}

static int wait_sleeping(MPI_Request *req, MPI_Status *st)
{
    int rc = CX_OK, flag = 0;
    for (;;) {
        MPI_TRY(MPI_Test(req, &flag, st));
        if (flag)
            break;
        nap(WORKER_POLL_NS);
    }
done:
    return rc;
}

/* A worker rank: compute batches until told to stop. */
static int work(MPI_Comm comm, computer *w)
{
    int rc = CX_OK, err = 0;
    int64_t *buf[DEPTH] = {NULL};
    MPI_Request req[DEPTH];
    MPI_Status st;
    for (int s = 0; s < DEPTH; s++)
        req[s] = MPI_REQUEST_NULL;
    for (int s = 0; s < DEPTH; s++)
        CX_ALLOC(buf[s], 2 + MAX_BATCH_CELLS);
    for (int s = 0; s < DEPTH; s++)
        MPI_TRY(MPI_Irecv(buf[s], 2 + MAX_BATCH_CELLS, MPI_INT64_T, 0, TAG_WORK, comm, &req[s]));
    for (int cur = 0;; cur = (cur + 1) % DEPTH) {
        CX_TRY(wait_sleeping(&req[cur], &st));
        cx_idx n = buf[cur][1];
        if (n == 0)
            break;
        int64_t ack[DONE_LEN] = {0};
        ack[0] = buf[cur][0];
        ack[1] = n;
        if (!err) {
            int crc = compute_batch(w, buf[cur] + 2, n, ack + 3, &ack[1]);
            if (crc != CX_OK) {
                /* Keep the trace for the report; tell the coordinator; keep answering. */
                cx_err_print("coexist", 0);
                err = 1;
            }
        }
        /* Flushed (not synced) after every batch: a killed process then loses nothing;
         * only the fsync at checkpoints guards against a lost machine. */
        if (!err && fflush_journal(w) != CX_OK) {
            cx_err_print("coexist", 0);
            err = 1;
        }
        ack[2] = err;
        MPI_TRY(
            MPI_Irecv(buf[cur], 2 + MAX_BATCH_CELLS, MPI_INT64_T, 0, TAG_WORK, comm, &req[cur]));
        MPI_TRY(MPI_Send(ack, DONE_LEN, MPI_INT64_T, 0, TAG_DONE, comm));
    }
    if (err)
        rc = CX_FAIL(CX_ERR_INTERNAL, "this rank failed while computing cells");
done:
    for (int s = 0; s < DEPTH; s++) {
        if (req[s] != MPI_REQUEST_NULL) {
            MPI_Cancel(&req[s]);
            MPI_Wait(&req[s], MPI_STATUS_IGNORE);
        }
        free(buf[s]);
    }
    return rc;
}

static int is_dir(const char *p)
{
    struct stat sb;
    return stat(p, &sb) == 0 && S_ISDIR(sb.st_mode);
}

static int remove_journals(const char *cube)
{
    int rc = CX_OK;
    char dir[CX_PATH_LEN];
    cx_journal_dir(cube, dir, sizeof dir);
    DIR *d = opendir(dir);
    if (d == NULL)
        return CX_OK;
    struct dirent *e;
    while ((e = readdir(d)) != NULL) {
        size_t len = strlen(e->d_name);
        if (len > 4 && strcmp(e->d_name + len - 4, ".jnl") == 0) {
            char p[CX_PATH_LEN + 300];
            snprintf(p, sizeof p, "%s/%s", dir, e->d_name);
            if (unlink(p) != 0)
                rc = CX_FAIL(CX_ERR_IO, "cannot remove %s: %s", p, strerror(errno));
        }
    }
    closedir(d);
    if (rc == CX_OK && rmdir(dir) != 0)
        rc = CX_FAIL(CX_ERR_IO, "cannot remove %s: %s", dir, strerror(errno));
    return rc;
}

/* Preflight on rank 0: nothing is created or changed unless every check passes. */
static int prepare(const cx_plan *plan, const cx_engine_opts *o, int ranks, double start,
                   int *created)
{
    int rc = CX_OK;
    char dir[CX_PATH_LEN], jdir[CX_PATH_LEN];
    int kind;
    *created = 0;
    snprintf(dir, sizeof dir, "%s", o->cube);
    char *slash = strrchr(dir, '/');
    if (slash == NULL)
        snprintf(dir, sizeof dir, ".");
    else if (slash == dir)
        dir[1] = '\0';
    else
        *slash = '\0';
    if (!is_dir(dir))
        CX_RAISE(CX_ERR_INVALID, "cannot write %s: %s %s", o->cube, dir,
                 access(dir, F_OK) == 0 ? "is not a directory" : "does not exist");
    if (access(dir, W_OK | X_OK) != 0)
        CX_RAISE(CX_ERR_INVALID, "cannot write %s: directory %s is not writable", o->cube, dir);
    CX_TRY(cx_cube_probe(o->cube, &kind));
    if (kind == CX_CUBE_FOREIGN)
        CX_RAISE(CX_ERR_INVALID,
                 "%s exists and is not a coexist cube; it was not touched (choose another "
                 "output path)",
                 o->cube);
    cx_journal_dir(o->cube, jdir, sizeof jdir);
    if (o->shard_count > 0) {
        /* A shard never creates or writes the cube; it only checks that a cube already there
         * belongs to this study. Array tasks start together: the directory may appear under
         * our feet. */
        CX_REQUIRE(!o->fresh, CX_ERR_INVALID, "a shard cannot start over (--fresh)");
        if (kind == CX_CUBE_OURS)
            CX_TRY(cx_cube_check(o->cube, plan));
        if (!is_dir(jdir) && mkdir(jdir, 0777) != 0 && errno != EEXIST)
            CX_RAISE(CX_ERR_IO, "cannot create the journal directory %s: %s", jdir,
                     strerror(errno));
        goto done;
    }
    if (kind == CX_CUBE_OURS && access(o->cube, W_OK) != 0)
        CX_RAISE(CX_ERR_INVALID, "cannot write %s: the file is not writable", o->cube);
    if (kind == CX_CUBE_OURS && !o->fresh)
        CX_TRY(cx_cube_check(o->cube, plan));
    if (o->fresh) {
        if (kind == CX_CUBE_OURS && unlink(o->cube) != 0)
            CX_RAISE(CX_ERR_IO, "cannot remove %s: %s", o->cube, strerror(errno));
        CX_TRY(remove_journals(o->cube));
        kind = CX_CUBE_ABSENT;
    }
    if (kind == CX_CUBE_ABSENT) {
        CX_TRY(cx_cube_create(o->cube, plan, ranks, start));
        *created = 1;
    }
    if (!is_dir(jdir) && mkdir(jdir, 0777) != 0 && errno != EEXIST)
        CX_RAISE(CX_ERR_IO, "cannot create the journal directory %s: %s", jdir, strerror(errno));
done:
    return rc;
}

typedef struct replay_ctx {
    uint8_t *done;
    const cx_plan *plan;
    cx_cube *cube;
    unsigned char *buf;
    cx_idx n;
    size_t rs;
    cx_idx merged;
} replay_ctx;

static int replay_one(void *arg, const unsigned char *rec)
{
    int rc = CX_OK;
    replay_ctx *r = arg;
    int64_t cell = cx_record_cell(rec);
    if (cell < 0 || cell >= r->plan->ncells || r->done[cell])
        return CX_OK;
    r->done[cell] = 1;
    memcpy(r->buf + (size_t)r->n * r->rs, rec, r->rs);
    r->n++;
    r->merged++;
    if (r->n == PENDING_MAX) {
        if (r->cube != NULL)
            CX_TRY(cx_cube_write_records(r->cube, r->buf, r->n));
        r->n = 0;
    }
done:
    return rc;
}

/* Rank 0: replay every journal of the cube (or those whose name starts with `prefix`) into it,
 * or, with no cube open, only into the done mask. */
static int replay_all(const cx_plan *plan, const char *cube_path, cx_cube *cube, uint8_t *done,
                      const char *prefix, cx_idx *merged, int64_t *dropped, int quiet)
{
    int rc = CX_OK;
    char jdir[CX_PATH_LEN];
    replay_ctx r = {done, plan, cube, NULL, 0, cx_record_size(plan->max_runs, plan->max_tasks), 0};
    DIR *d = NULL;
    cx_journal_dir(cube_path, jdir, sizeof jdir);
    *dropped = 0;
    CX_ALLOC(r.buf, (size_t)PENDING_MAX * r.rs);
    d = opendir(jdir);
    if (d != NULL) {
        struct dirent *e;
        while ((e = readdir(d)) != NULL) {
            size_t len = strlen(e->d_name);
            if (len <= 4 || strcmp(e->d_name + len - 4, ".jnl") != 0)
                continue;
            if (prefix != NULL && strncmp(e->d_name, prefix, strlen(prefix)) != 0)
                continue;
            char p[CX_PATH_LEN + 300];
            cx_replay_stats st;
            snprintf(p, sizeof p, "%s/%s", jdir, e->d_name);
            CX_TRY(cx_journal_replay(p, plan->hash, plan->max_runs, plan->max_tasks, replay_one, &r,
                                     &st));
            *dropped += st.torn + st.bad_crc;
            if (!quiet && (st.torn + st.bad_crc) > 0)
                fprintf(stderr,
                        "coexist: %s: dropped %lld damaged record(s) (%lld torn, %lld bad CRC)\n",
                        p, (long long)(st.torn + st.bad_crc), (long long)st.torn,
                        (long long)st.bad_crc);
        }
    }
    if (cube != NULL)
        CX_TRY(cx_cube_write_records(cube, r.buf, r.n));
    *merged = r.merged;
done:
    if (d != NULL)
        closedir(d);
    free(r.buf);
    return rc;
}

static int node_ranks(MPI_Comm comm, int *n)
{
    int rc = CX_OK;
    MPI_Comm node = MPI_COMM_NULL;
    MPI_TRY(MPI_Comm_split_type(comm, MPI_COMM_TYPE_SHARED, 0, MPI_INFO_NULL, &node));
    MPI_TRY(MPI_Comm_size(node, n));
done:
    if (node != MPI_COMM_NULL)
        MPI_Comm_free(&node);
    return rc;
}

static void print_start(const cx_plan *plan, const cx_units *u, const cx_engine_stats *st, int size,
                        int computes, long cores, const cx_engine_opts *o)
{
    fprintf(stderr, "coexist %s: study \"%s\" -> %s\n", o->merge_only ? "merge" : "run", plan->name,
            o->cube);
    if (o->shard_count > 0)
        fprintf(stderr,
                "  shard %d of %d (numbered from 0): its journals only; `coexist merge` builds "
                "the cube\n",
                o->shard_index, o->shard_count);
    fprintf(stderr, "  grid: ");
    for (int i = 0; i < plan->naxes; i++)
        fprintf(stderr, "%s%s[%lld]", i ? " x " : "", plan->axes[i].name,
                (long long)plan->axes[i].len);
    fprintf(stderr, "%s= %lld cells, %d run(s) x %d task(s) per cell\n", plan->naxes ? " " : "",
            (long long)plan->ncells, plan->max_runs, plan->max_tasks);
    fprintf(stderr,
            "  to compute: %lld cells in %lld work units (%lld network groups); %lld already "
            "in the cube, %lld merged from journals, %lld damaged journal records dropped\n",
            (long long)cx_units_cells(u), (long long)cx_units_count(u),
            (long long)cx_units_groups(u), (long long)st->done_in_cube, (long long)st->replayed,
            (long long)st->dropped);
    fprintf(stderr, "  ranks: %d (rank 0 %s), cores: %ld, BLAS threads per rank: %d\n", size,
            computes ? "coordinates and computes" : "coordinates only", cores, o->blas_threads);
    double flops = cx_units_cost(u);
    fprintf(stderr,
            "  estimated work: %.3g flop = %.3g core-hours at an assumed %.3g flop/s per core "
            "(an assumption, not a measurement)\n",
            flops, flops / o->flop_rate / 3600.0, o->flop_rate);
    fflush(stderr);
}

/* The grace watchdog: once a stop is requested, cells still computing after grace seconds are
 * left; the process ends with exit status 3 (CX_EXIT_INCOMPLETE of the command line). Records
 * of finished cells are already with the operating system (compute_batch flushes each one
 * after a stop request), so a rerun or a merge finds them in the journals. The watchdog runs
 * only during the run phase and is stopped before the final cube writes, so it never ends a
 * process that is closing the cube. */
typedef struct watchdog {
    pthread_t thread;
    pthread_mutex_t lock;
    int quit;
    double grace;
    int rank;
} watchdog;

static void *watchdog_main(void *arg)
{
    watchdog *wd = arg;
    double since = -1.0;
    for (;;) {
        pthread_mutex_lock(&wd->lock);
        int quit = wd->quit;
        pthread_mutex_unlock(&wd->lock);
        if (quit)
            break;
        if (stop_requested && since < 0) {
            since = cx_clock_mono();
            if (wd->rank == 0)
                fprintf(stderr,
                        "coexist: stop requested: no more work is handed out; cells being "
                        "computed have %.0f s to finish\n",
                        wd->grace);
        }
        if (since >= 0 && cx_clock_mono() - since > wd->grace) {
            fprintf(stderr,
                    "coexist: rank %d: cells still computing %.0f s after the stop request are "
                    "left not done; exiting with status 3\n",
                    wd->rank, wd->grace);
            fflush(stderr);
            _exit(3);
        }
        nap(50000000L);
    }
    return NULL;
}

int cx_engine_run(MPI_Comm comm, const cx_plan *plan, const cx_study *s, const cx_engine_ops *ops,
                  const cx_engine_opts *o, cx_engine_stats *st)
{
    int shard = o->shard_count > 0;
    uint8_t *shard_cells = NULL;
    watchdog wd;
    int wd_started = 0, wd_init = 0;
    memset(&wd, 0, sizeof wd);
    int rc = CX_OK, rank = 0, size = 1, created = 0, computes = 0;
    double start = cx_clock_wall();
    cx_cube *cube = NULL;
    uint8_t *done = NULL;
    cx_units *units = NULL;
    computer comp;
    local_worker *lw = NULL;
    coord c;
    int thread_started = 0, comp_ready = 0;
    double write_seconds = 0.0;
    char jpath[CX_PATH_LEN];
    memset(st, 0, sizeof *st);
    memset(&c, 0, sizeof c);
    memset(&comp, 0, sizeof comp);
    stop_requested = 0;
    MPI_TRY(MPI_Comm_rank(comm, &rank));
    MPI_TRY(MPI_Comm_size(comm, &size));
    st->cells = plan->ncells;

    int prc = rank == 0 ? prepare(plan, o, size, start, &created) : CX_OK;
    {
        int code = prc;
        MPI_TRY(MPI_Bcast(&code, 1, MPI_INT, 0, comm));
        if (code != CX_OK) {
            rc = rank == 0 ? prc : CX_FAIL(code, "rank 0 refused to start (see its message)");
            goto done;
        }
    }
    if (!shard)
        CX_TRY(agree(comm, cx_cube_open(comm, o->cube, plan, &cube)));

    /* Rank 0: what is done, journals merged, the schedule. */
    int lrc = CX_OK;
    long cores = sysconf(_SC_NPROCESSORS_ONLN);
    int on_node = 1;
    CX_TRY(node_ranks(comm, &on_node));
    computes =
        size == 1 || (o->coordinator_computes < 0 ? on_node <= cores : o->coordinator_computes > 0);
    if (o->merge_only)
        computes = 0;
    char prefix[64];
    snprintf(prefix, sizeof prefix, "shard-%04d-of-%04d-", o->shard_index, o->shard_count);
    if (rank == 0) {
        done = cx_calloc_array((size_t)plan->ncells, 1);
        lrc = done == NULL ? CX_FAIL(CX_ERR_NOMEM, "out of memory") : CX_OK;
        if (lrc == CX_OK && shard) {
            shard_cells = cx_calloc_array((size_t)plan->ncells, 1);
            lrc = shard_cells == NULL
                      ? CX_FAIL(CX_ERR_NOMEM, "out of memory")
                      : cx_shard_mask(plan, o->shard_index, o->shard_count, shard_cells, NULL);
        }
        if (lrc == CX_OK && cube != NULL)
            lrc = cx_cube_read_done(cube, done);
        if (lrc == CX_OK && cube == NULL) {
            /* A shard reads an existing cube serially and only to skip what is done. */
            int kind = CX_CUBE_ABSENT;
            lrc = cx_cube_probe(o->cube, &kind);
            if (lrc == CX_OK && kind == CX_CUBE_OURS) {
                cx_cube_summary sum_c;
                uint8_t *cdone = NULL;
                lrc = cx_cube_summarize(o->cube, &sum_c, &cdone);
                if (lrc == CX_OK && cdone != NULL)
                    memcpy(done, cdone, (size_t)plan->ncells);
                free(cdone);
            }
        }
        if (lrc == CX_OK) {
            for (cx_idx k = 0; k < plan->ncells; k++)
                st->done_in_cube += done[k] != 0 && (shard_cells == NULL || shard_cells[k]);
            lrc = replay_all(plan, o->cube, cube, done, shard ? prefix : NULL, &st->replayed,
                             &st->dropped, o->quiet);
        }
        if (lrc == CX_OK) {
            for (cx_idx k = 0; k < plan->ncells; k++)
                done[k] = !done[k] && (shard_cells == NULL || shard_cells[k]) && !o->merge_only;
            lrc = cx_units_build(plan, done, MAX_BATCH_CELLS, &units);
        }
    }
    CX_TRY(agree(comm, lrc));

    if (rank != 0 || computes) {
        if (shard)
            cx_journal_shard_path(o->cube, o->shard_index, o->shard_count, rank, jpath,
                                  sizeof jpath);
        else
            cx_journal_path(o->cube, rank, jpath, sizeof jpath);
        lrc = computer_init(&comp, plan, s, ops, o, rank, jpath);
        comp_ready = 1;
        comp.cube = rank == 0 ? NULL : cube;
        comp.journal_only = shard;
    }
    CX_TRY(agree(comm, lrc));
    if (rank == 0) {
        st->units = cx_units_count(units);
        st->estimated_flops = cx_units_cost(units);
        st->scheduled = cx_units_cells(units);
        st->coordinator_computes = computes;
        st->compute_ranks = size - 1 + computes;
        if (!o->quiet)
            print_start(plan, units, st, size, computes, cores, o);
    }

    MPI_TRY(MPI_Barrier(comm));
    wd.grace = o->grace_seconds;
    wd.rank = rank;
    pthread_mutex_init(&wd.lock, NULL);
    wd_init = 1;
    if (!o->merge_only && pthread_create(&wd.thread, NULL, watchdog_main, &wd) == 0)
        wd_started = 1;
    double t_run = cx_clock_mono(), cpu0 = cx_clock_thread_cpu();
    int run_rc = CX_OK;
    if (rank == 0) {
        c.comm = comm;
        c.size = size;
        c.computes = computes;
        c.units = units;
        c.max_units = o->max_units_per_batch;
        c.todo = cx_units_cells(units);
        c.active = size - 1 + computes;
        c.sendbuf = cx_calloc_array((size_t)size * DEPTH * (2 + MAX_BATCH_CELLS), sizeof(int64_t));
        c.sendreq = cx_malloc_array((size_t)size * DEPTH, sizeof(MPI_Request));
        c.outstanding = cx_calloc_array((size_t)size, sizeof(int));
        c.next_slot = cx_calloc_array((size_t)size, sizeof(int));
        c.stopped = cx_calloc_array((size_t)size, sizeof(int));
        if (c.sendbuf == NULL || c.sendreq == NULL || c.outstanding == NULL ||
            c.next_slot == NULL || c.stopped == NULL) {
            run_rc = CX_FAIL(CX_ERR_NOMEM, "out of memory for the coordinator");
        } else {
            for (int k = 0; k < DEPTH * size; k++)
                c.sendreq[k] = MPI_REQUEST_NULL;
            if (computes) {
                lw = cx_calloc_array(1, sizeof *lw);
                if (lw == NULL) {
                    run_rc = CX_FAIL(CX_ERR_NOMEM, "out of memory");
                } else {
                    lw->comp = comp;
                    pthread_mutex_init(&lw->lock, NULL);
                    pthread_cond_init(&lw->cond, NULL);
                    lw->comp.lock = &lw->lock;
                    c.lw = lw;
                    int slots_ok = 1;
                    for (int k = 0; k < DEPTH; k++) {
                        lw->slot[k] = cx_malloc_array(MAX_BATCH_CELLS, sizeof(int64_t));
                        slots_ok = slots_ok && lw->slot[k] != NULL;
                    }
                    if (!slots_ok || pthread_create(&lw->thread, NULL, local_main, lw) != 0)
                        run_rc = CX_FAIL(CX_ERR_INTERNAL, "cannot start the computing thread");
                    else
                        thread_started = 1;
                }
            }
        }
        if (run_rc == CX_OK)
            run_rc = coordinate(&c, o, cube, &write_seconds);
        if (run_rc != CX_OK) {
            /* Tell every worker not yet stopped to stop, so nobody waits forever: a worker
             * finishes the batches it holds (their acknowledgements are left unread), then
             * meets the stop, which comes after them. */
            for (int w = 1; w < size && c.stopped != NULL; w++)
                if (!c.stopped[w]) {
                    int64_t stopmsg[2] = {-1, 0};
                    MPI_Send(stopmsg, 2, MPI_INT64_T, w, TAG_WORK, comm);
                    c.stopped[w] = 1;
                }
        }
        if (thread_started) {
            pthread_mutex_lock(&lw->lock);
            lw->stop = 1;
            pthread_cond_signal(&lw->cond);
            pthread_mutex_unlock(&lw->lock);
            pthread_join(lw->thread, NULL);
            comp = lw->comp;
            comp.lock = NULL;
            if (run_rc == CX_OK && lw->failed)
                run_rc = CX_FAIL(CX_ERR_INTERNAL, "rank 0's computing thread failed");
            /* Records the coordinator has not drained yet. */
            if (run_rc == CX_OK && cube != NULL)
                run_rc = cx_cube_write_records(cube, comp.pending, comp.npending);
            comp.npending = 0;
        }
        if (c.sendreq != NULL)
            MPI_Waitall(DEPTH * size, c.sendreq, MPI_STATUSES_IGNORE);
        if (run_rc == CX_OK && c.failed)
            run_rc = CX_FAIL(CX_ERR_INTERNAL, "a worker failed (see its messages)");
        st->batches = c.batches;
        st->computed = c.cells_done;
        st->interrupted = stop_requested || c.failed;
    } else {
        run_rc = work(comm, &comp);
        if (run_rc == CX_OK)
            run_rc = computer_checkpoint(&comp);
    }
    st->wall = cx_clock_mono() - t_run;
    st->rank0_cpu = cx_clock_thread_cpu() - cpu0;
    if (wd_started) {
        pthread_mutex_lock(&wd.lock);
        wd.quit = 1;
        pthread_mutex_unlock(&wd.lock);
        pthread_join(wd.thread, NULL);
        wd_started = 0;
    }
    /* Kept apart from rc: the MPI_TRY calls below assign rc and would erase a failure. */
    int agreed = agree(comm, run_rc);

    /* Sums over ranks: stage counts, compute and write seconds. */
    int64_t mine[7] = {0}, sum[7];
    double dmine[2] = {comp.compute_seconds, comp.write_seconds + write_seconds}, dsum[2];
    if (comp_ready && comp.state != NULL) {
        cx_cell_counts cc;
        ops->counts(comp.state, &cc);
        int64_t v[6] = {cc.networks, cc.spectral_radii, cc.inputs, cc.drives, cc.solves, cc.probes};
        memcpy(mine, v, sizeof v);
    }
    MPI_TRY(MPI_Allreduce(mine, sum, 7, MPI_INT64_T, MPI_SUM, comm));
    MPI_TRY(MPI_Allreduce(dmine, dsum, 2, MPI_DOUBLE, MPI_SUM, comm));
    st->counts = (cx_cell_counts){sum[0], sum[1], sum[2], sum[3], sum[4], sum[5]};
    st->compute_seconds = dsum[0];
    st->write_seconds = dsum[1];
    if (comp_ready) {
        int jrc = computer_free(&comp);
        if (agreed == CX_OK)
            agreed = jrc;
        comp_ready = 0;
    }
    CX_TRY(agree(comm, agreed));

    int64_t fin[2] = {0, 0};
    if (rank == 0) {
        fin[0] = st->computed;
        fin[1] = shard ? st->computed == st->scheduled
                       : st->done_in_cube + st->replayed + st->computed == plan->ncells;
    }
    MPI_TRY(MPI_Bcast(fin, 2, MPI_INT64_T, 0, comm));
    if (shard) {
        /* Journals only: make them durable, leave the cube to `coexist merge`. */
        st->complete = (int)fin[1];
        goto done;
    }
    double end = cx_clock_wall();
    MPI_TRY(MPI_Bcast(&end, 1, MPI_DOUBLE, 0, comm));
    MPI_TRY(MPI_Bcast(&start, 1, MPI_DOUBLE, 0, comm));
    cx_cube_final f = {size, start, end, st->counts, fin[0], (int)fin[1]};
    CX_TRY(agree(comm, cx_cube_finish(cube, &f)));
    st->complete = (int)fin[1];
    CX_TRY(agree(comm, cx_cube_close(&cube)));
    if (rank == 0) {
        int fd = open(o->cube, O_RDONLY);
        if (fd >= 0) {
            fsync(fd);
            close(fd);
        }
        if (st->complete && !o->keep_journals)
            CX_TRY(remove_journals(o->cube));
    }
    /* The final counts by status come from the cube rank 0 just closed. */
    if (rank == 0) {
        cx_cube_summary sum_c;
        CX_TRY(cx_cube_summarize(o->cube, &sum_c, NULL));
        memcpy(st->by_status, sum_c.by_status, sizeof st->by_status);
    }
done:
    (void)created;
    if (wd_started) {
        pthread_mutex_lock(&wd.lock);
        wd.quit = 1;
        pthread_mutex_unlock(&wd.lock);
        pthread_join(wd.thread, NULL);
    }
    if (wd_init)
        pthread_mutex_destroy(&wd.lock);
    free(shard_cells);
    if (comp_ready)
        computer_free(&comp);
    if (cube != NULL)
        cx_cube_close(&cube);
    if (lw != NULL) {
        for (int k = 0; k < DEPTH; k++)
            free(lw->slot[k]);
        pthread_mutex_destroy(&lw->lock);
        pthread_cond_destroy(&lw->cond);
        free(lw);
    }
    free(c.sendbuf);
    free(c.sendreq);
    free(c.outstanding);
    free(c.next_slot);
    free(c.stopped);
    cx_units_destroy(&units);
    free(done);
    return rc;
}
