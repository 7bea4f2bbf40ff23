/* coexist: the clocks, in seconds as doubles. Timings are stored with results (wall_time) and
 * printed by the benchmark; none of them ever changes a result. */
#ifndef COEXIST_CLOCK_H
#define COEXIST_CLOCK_H

double cx_clock_mono(void);       /* CLOCK_MONOTONIC: for intervals */
double cx_clock_wall(void);       /* CLOCK_REALTIME, seconds since 1970: for time stamps */
double cx_clock_cpu(void);        /* CPU time of the process (all threads) */
double cx_clock_thread_cpu(void); /* CPU time of the calling thread */

#endif
