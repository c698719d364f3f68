/* test_deflate_runs.c - the PNG writer's deflate blocks (src/deflate_runs.c)
 * against an independent decoder: zlib's inflate (Debian's zlib1g), which
 * checks every code, length and distance against RFC 1951. Inputs are made
 * to reach each path: noise with no runs, runs of every length from 2 to
 * 600 (around the 3-byte minimum and the 258-byte maximum of a match, and
 * across the eight-byte tests), a block that is all one byte, blocks of
 * 1 to 20 bytes, and several blocks joined into one stream as the banded
 * encoder joins them. */
#include "check.h"
#include "deflate_runs.h"

#include <stdlib.h>
#include <string.h>
#include <zlib.h>

static unsigned seed = 2026;

static unsigned rnd(unsigned n)
{
    seed = seed * 1103515245u + 12345u;
    return (seed >> 8) % n;
}

/* data[0..n) cut into 'blocks' consecutive blocks, each encoded on its
 * own (the last final), joined, and inflated by zlib: 1 when zlib reads
 * back exactly data and the stream ends where the last block does. */
static int round_trip(const uint8_t *data, size_t n, size_t blocks, size_t *coded)
{
    size_t cap = 0;
    for (size_t b = 0; b < blocks; b++)
        cap += lam__deflate_runs_bound(n / blocks + 1);
    uint8_t *out = malloc(cap), *back = malloc(n + 16);
    void *scratch = malloc(lam__deflate_runs_scratch(n));
    if (!out || !back || !scratch) {
        free(out), free(back), free(scratch);
        return 0;
    }
    size_t len = 0;
    for (size_t b = 0; b < blocks; b++) {
        size_t i0 = n * b / blocks, i1 = n * (b + 1) / blocks;
        len += lam__deflate_runs(data + i0, i1 - i0, b + 1 == blocks, scratch, out + len);
    }
    z_stream z;
    memset(&z, 0, sizeof z);
    int ok = inflateInit2(&z, -15) == Z_OK;
    z.next_in = out;
    z.avail_in = (uInt)len;
    z.next_out = back;
    z.avail_out = (uInt)(n + 16);
    ok = ok && inflate(&z, Z_FINISH) == Z_STREAM_END && z.total_out == n && z.avail_in == 0 &&
         memcmp(back, data, n) == 0;
    inflateEnd(&z);
    *coded = len;
    free(out), free(back), free(scratch);
    return ok;
}

/* Runs of every length from 2 to 600 of random bytes, each run a new byte
 * (so none joins the one before), with single bytes between some. */
static size_t runs_of_every_length(uint8_t *data)
{
    size_t n = 0;
    uint8_t last = 0;
    for (size_t r = 2; r <= 600; r++) {
        uint8_t v = (uint8_t)(last + 1 + rnd(255));
        for (size_t k = 0; k < r; k++)
            data[n++] = v;
        last = v;
        if (r % 3 == 0) {
            last = (uint8_t)(last + 1 + rnd(255));
            data[n++] = last;
        }
    }
    return n;
}

int main(void)
{
    check_begin("test_deflate_runs");
    const size_t big = 200000;
    uint8_t *data = malloc(big);
    size_t coded = 0;
    if (!check_true(data != NULL, "buffer"))
        return check_summary();

    for (size_t i = 0; i < big; i++)
        data[i] = (uint8_t)rnd(256);
    check_true(round_trip(data, big, 1, &coded), "noise, one block");
    check_true(coded < big + big / 50, "noise costs under 2 %% more than stored (%zu)", coded);
    check_true(round_trip(data, big, 7, &coded), "noise, seven blocks joined");

    size_t n = runs_of_every_length(data);
    check_true(round_trip(data, n, 1, &coded), "runs of 2..600 bytes (%zu bytes)", n);
    check_true(coded < n / 10, "runs cost under a tenth of their bytes (%zu of %zu)", coded, n);
    check_true(round_trip(data, n, 5, &coded), "runs cut across five blocks");

    memset(data, 0x5a, big);
    check_true(round_trip(data, big, 1, &coded), "one byte throughout");
    check_true(coded < 1000, "one byte throughout: %zu bytes", coded);
    check_true(round_trip(data, big, 3, &coded), "one byte throughout, three blocks");

    for (size_t i = 0; i < big; i++) /* small values with zeros, like filtered noise */
        data[i] = (uint8_t)(rnd(4) == 0 ? 0 : rnd(5) - 2);
    check_true(round_trip(data, big, 4, &coded), "filtered-noise-like bytes, four blocks");

    int tiny = 1;
    for (size_t m = 1; m <= 20; m++) {
        for (size_t i = 0; i < m; i++)
            data[i] = (uint8_t)(rnd(3) ? 7 : rnd(256));
        tiny &= round_trip(data, m, 1, &coded);
        if (m >= 2)
            tiny &= round_trip(data, m, 2, &coded);
    }
    check_true(tiny, "blocks of 1 to 20 bytes, alone and in pairs");

    /* all 256 byte values with counts spread over five orders of magnitude:
     * the optimal code is longer than 15 bits and must be limited */
    n = 0;
    for (size_t v = 0; v < 256 && n < big; v++)
        for (size_t k = 0; k < (v < 20 ? 1 : (size_t)1 << (v % 17)) && n < big; k++)
            data[n++] = (uint8_t)(v * 37 + (k & 1));
    check_true(round_trip(data, n, 1, &coded), "skewed counts (codes limited to 15 bits)");
    free(data);
    return check_summary();
}
