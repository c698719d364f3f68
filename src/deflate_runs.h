/* deflate_runs.h - one deflate block (RFC 1951) of literals and runs:
 * every byte is coded as itself, except that 3 to 258 copies of the byte
 * before become one match at distance 1; both with a Huffman code made for
 * the block (internal to the PNG writer).
 *
 * Why: the matches a general deflate looks for cost most of its time and
 * find little in a filtered camera picture, while runs of one byte are
 * what flat areas (substrate, layer maps, drawings) give. zlib's fastest
 * run-length mode ran at 120-220 MB/s on the annotated pictures; this
 * codes the same runs in two tight passes, several times faster, in files
 * within a few per cent of zlib's size (docs/performance.md).
 *
 * A block that is not the last ends on a byte boundary with an empty
 * stored block (what zlib's Z_SYNC_FLUSH writes), so blocks made side by
 * side join into one stream. A run refers only to bytes of its own block.
 */
#ifndef LAMINA_DEFLATE_RUNS_H
#define LAMINA_DEFLATE_RUNS_H

#include <stddef.h>
#include <stdint.h>

/* Bytes of output lam__deflate_runs may write for n bytes of input, and
 * bytes of scratch it needs. */
size_t lam__deflate_runs_bound(size_t n);
size_t lam__deflate_runs_scratch(size_t n);

/* data[0..n) (1 <= n < 2^32) as one dynamic-Huffman block, then, unless
 * 'final', an empty stored block; the last byte is padded with zero bits.
 * 'scratch' holds lam__deflate_runs_scratch(n) bytes, aligned as malloc
 * gives them. Returns the bytes written to out. */
size_t lam__deflate_runs(const uint8_t *data, size_t n, int final, void *scratch, uint8_t *out);

#endif
