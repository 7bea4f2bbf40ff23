/* coexist engine: the fixed-size result record shared by journals and result messages.
 *
 * Layout (native byte order, which the journal header records; offsets in bytes):
 *   0 u32 magic 'CXR1' | 4 u32 writer rank | 8 i64 cell | 16 f64 finish time (Unix s)
 *  24 f64 wall time (s) | 32 i32 status, ntasks, nruns, multifunctional, untrained,
 *     untrained fixed points, untrained cycles, untrained aperiodic
 *  64 f64 rho_unscaled, wout_norm, wout_square_norm
 *  88 per run (max_runs of them): i32 outcome, i32 attractor, i32 cluster, i32 0,
 *     f64 distance[max_tasks], f64 coverage, roundness, rotation, period, valid_time,
 *     lyapunov, stop_time
 *  end: u32 CRC-32C of every byte before it, u32 0.
 * The size depends only on (max_runs, max_tasks) of the study, so a journal of one study has
 * one record size, and the last eight bytes make a torn or flipped record detectable.
 */
#include <math.h>
#include <string.h>

#include "coexist/engine.h"

#define CX_RECORD_MAGIC 0x31525843u /* "CXR1" read as little-endian bytes */
#define RUN_FIXED       (16 + 7 * 8)

size_t cx_record_size(int max_runs, int max_tasks)
{
    return (size_t)88 + (size_t)max_runs * (RUN_FIXED + 8 * (size_t)max_tasks) + 8;
}

static unsigned char *put(unsigned char *p, const void *v, size_t n)
{
    memcpy(p, v, n);
    return p + n;
}

static const unsigned char *get(const unsigned char *p, void *v, size_t n)
{
    memcpy(v, p, n);
    return p + n;
}

void cx_record_encode(const cx_cell_result *r, double wall, double finished, int rank, int max_runs,
                      int max_tasks, unsigned char *buf)
{
    size_t size = cx_record_size(max_runs, max_tasks);
    memset(buf, 0, size);
    unsigned char *p = buf;
    uint32_t magic = CX_RECORD_MAGIC, urank = (uint32_t)rank;
    int64_t cell = r->cell;
    int32_t ints[8] = {r->status,
                       r->ntasks,
                       r->nruns,
                       r->multifunctional,
                       r->untrained,
                       r->untrained_kinds[0],
                       r->untrained_kinds[1],
                       r->untrained_kinds[2]};
    p = put(p, &magic, 4);
    p = put(p, &urank, 4);
    p = put(p, &cell, 8);
    p = put(p, &finished, 8);
    p = put(p, &wall, 8);
    p = put(p, ints, sizeof ints);
    p = put(p, &r->rho_unscaled, 8);
    p = put(p, &r->wout_norm, 8);
    p = put(p, &r->wout_square_norm, 8);
    for (int k = 0; k < max_runs; k++) {
        cx_run_metrics m;
        if (k < r->nruns && k < CX_MAX_RUNS) {
            m = r->runs[k];
        } else {
            memset(&m, 0, sizeof m);
            m.outcome = CX_OUT_NOT_RUN;
            m.attractor = -1;
            m.cluster = -1;
            for (int t = 0; t < CX_MAX_TASKS; t++)
                m.distance[t] = NAN;
            m.coverage = m.roundness = m.rotation = m.period = NAN;
            m.valid_time = m.lyapunov = m.stop_time = NAN;
        }
        int32_t oa[4] = {m.outcome, m.attractor, m.cluster, 0};
        p = put(p, oa, sizeof oa);
        for (int t = 0; t < max_tasks; t++) {
            double d = (t < r->ntasks && t < CX_MAX_TASKS) ? m.distance[t] : NAN;
            p = put(p, &d, 8);
        }
        p = put(p, &m.coverage, 8);
        p = put(p, &m.roundness, 8);
        p = put(p, &m.rotation, 8);
        p = put(p, &m.period, 8);
        p = put(p, &m.valid_time, 8);
        p = put(p, &m.lyapunov, 8);
        p = put(p, &m.stop_time, 8);
    }
    uint32_t crc = cx_crc32c(0, buf, (size_t)(p - buf));
    put(p, &crc, 4);
}

int cx_record_decode(const unsigned char *buf, int max_runs, int max_tasks, cx_cell_result *r,
                     double *wall, double *finished)
{
    size_t size = cx_record_size(max_runs, max_tasks);
    uint32_t magic, crc, urank;
    memcpy(&magic, buf, 4);
    memcpy(&crc, buf + size - 8, 4);
    if (magic != CX_RECORD_MAGIC || crc != cx_crc32c(0, buf, size - 8))
        return 1;
    memset(r, 0, sizeof *r);
    const unsigned char *p = buf + 4;
    int64_t cell;
    int32_t ints[8];
    p = get(p, &urank, 4);
    p = get(p, &cell, 8);
    p = get(p, finished, 8);
    p = get(p, wall, 8);
    p = get(p, ints, sizeof ints);
    r->cell = cell;
    r->status = ints[0];
    r->ntasks = ints[1];
    r->nruns = ints[2];
    r->multifunctional = ints[3];
    r->untrained = ints[4];
    for (int k = 0; k < 3; k++)
        r->untrained_kinds[k] = ints[5 + k];
    r->time.total = *wall;
    p = get(p, &r->rho_unscaled, 8);
    p = get(p, &r->wout_norm, 8);
    p = get(p, &r->wout_square_norm, 8);
    for (int k = 0; k < max_runs && k < CX_MAX_RUNS; k++) {
        cx_run_metrics *m = &r->runs[k];
        int32_t oa[4];
        p = get(p, oa, sizeof oa);
        m->outcome = oa[0];
        m->attractor = oa[1];
        m->cluster = oa[2];
        for (int t = 0; t < CX_MAX_TASKS; t++)
            m->distance[t] = NAN;
        for (int t = 0; t < max_tasks; t++) {
            double d;
            p = get(p, &d, 8);
            if (t < CX_MAX_TASKS)
                m->distance[t] = d;
        }
        p = get(p, &m->coverage, 8);
        p = get(p, &m->roundness, 8);
        p = get(p, &m->rotation, 8);
        p = get(p, &m->period, 8);
        p = get(p, &m->valid_time, 8);
        p = get(p, &m->lyapunov, 8);
        p = get(p, &m->stop_time, 8);
    }
    return 0;
}

int64_t cx_record_cell(const unsigned char *buf)
{
    int64_t cell;
    memcpy(&cell, buf + 8, 8);
    return cell;
}

double cx_record_finished(const unsigned char *buf)
{
    double t;
    memcpy(&t, buf + 16, 8);
    return t;
}

int cx_record_status(const unsigned char *buf)
{
    int32_t s;
    memcpy(&s, buf + 32, 4);
    return s;
}
