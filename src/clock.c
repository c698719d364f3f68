/* clock.c - a monotonic clock in seconds for stage timings and progress. */
#include "lamina/clock.h"

#include <time.h>

double lam_clock_seconds(void)
{
    struct timespec t;
    clock_gettime(CLOCK_MONOTONIC, &t);
    return (double)t.tv_sec + 1e-9 * (double)t.tv_nsec;
}
