/*
 * lamina/clock.h - elapsed time for the stage timings of an analysis and
 * the progress line of a batch.
 *
 * Seconds from CLOCK_MONOTONIC (not wall-clock time: it never jumps when
 * the system clock is set), so only differences mean anything. Thread-safe;
 * no errors.
 */
#ifndef LAMINA_CLOCK_H
#define LAMINA_CLOCK_H

/* Seconds since an arbitrary fixed point, with nanosecond resolution. */
double lam_clock_seconds(void);

#endif
