/* coexist: the clocks (include/coexist/clock.h), one POSIX clock_gettime each. */
#include <time.h>

#include "coexist/clock.h"

static double seconds(clockid_t id)
{
    struct timespec ts;
    if (clock_gettime(id, &ts) != 0)
        return 0.0;
    return (double)ts.tv_sec + 1e-9 * (double)ts.tv_nsec;
}

double cx_clock_mono(void)
{
    return seconds(CLOCK_MONOTONIC);
}

double cx_clock_wall(void)
{
    return seconds(CLOCK_REALTIME);
}

double cx_clock_cpu(void)
{
    return seconds(CLOCK_PROCESS_CPUTIME_ID);
}

double cx_clock_thread_cpu(void)
{
    return seconds(CLOCK_THREAD_CPUTIME_ID);
}
