/* deflate_runs.c - a deflate block of literals and runs at distance 1 with
 * its own Huffman codes (see deflate_runs.h; the format is RFC 1951, 3.2). */
#include "deflate_runs.h"

#include <stdlib.h>
#include <string.h>

#define SYMBOLS 286      /* literal/length alphabet: bytes, end of block, lengths */
#define END_OF_BLOCK 256
#define MAX_CODE_BITS 15 /* RFC 1951: literal/length and distance codes */
#define MAX_CL_BITS 7    /* RFC 1951: the code-length code */
#define CL_SYMBOLS 19
#define MIN_RUN 3
#define MAX_RUN 258

/* ---- Huffman codes ---- */

/* Symbols in order of count, then of symbol (so the code is the same on
 * every machine). */
typedef struct weighted {
    uint32_t count;
    uint16_t symbol;
} weighted;

static int by_count(const void *x, const void *y)
{
    const weighted *a = x, *b = y;
    if (a->count != b->count)
        return a->count < b->count ? -1 : 1;
    return (a->symbol > b->symbol) - (a->symbol < b->symbol);
}

/* Optimal code lengths for the n symbols (0 for count 0) by Huffman's
 * method: the two lightest nodes joined first, leaves and joined nodes
 * taken from two queues in order of weight. Returns the longest. */
static unsigned huffman(const uint32_t *count, size_t n, uint8_t *len)
{
    weighted leaf[SYMBOLS];
    uint64_t w[2 * SYMBOLS];
    size_t parent[2 * SYMBOLS], depth[2 * SYMBOLS], m = 0;
    for (size_t s = 0; s < n; s++) {
        len[s] = 0;
        if (count[s])
            leaf[m++] = (weighted){count[s], (uint16_t)s};
    }
    if (m == 0)
        return 0;
    if (m == 1) { /* one symbol: a one-bit code, which deflate allows incomplete */
        len[leaf[0].symbol] = 1;
        return 1;
    }
    qsort(leaf, m, sizeof *leaf, by_count);
    for (size_t i = 0; i < m; i++)
        w[i] = leaf[i].count;
    size_t next_leaf = 0, next_join = m, made = m;
    for (size_t k = 0; k + 1 < m; k++, made++) {
        size_t two[2];
        for (int t = 0; t < 2; t++)
            two[t] = next_leaf < m && (next_join >= made || w[next_leaf] <= w[next_join])
                         ? next_leaf++
                         : next_join++;
        w[made] = w[two[0]] + w[two[1]];
        parent[two[0]] = parent[two[1]] = made;
    }
    unsigned longest = 0;
    depth[made - 1] = 0; /* the root; every parent comes after its children */
    for (size_t i = made - 1; i-- > 0;) {
        depth[i] = depth[parent[i]] + 1;
        if (i < m) {
            len[leaf[i].symbol] = (uint8_t)depth[i];
            longest = depth[i] > longest ? (unsigned)depth[i] : longest;
        }
    }
    return longest;
}

/* Huffman code lengths of at most 'limit' bits: while the optimal code is
 * longer, the counts are halved (rounding up, so no symbol drops out) and
 * the code made again. Counts all 1 give a balanced code of ceil(log2 n)
 * bits, within both limits, so this ends. */
static void limited_lengths(const uint32_t *count, size_t n, unsigned limit, uint8_t *len)
{
    uint32_t c[SYMBOLS];
    memcpy(c, count, n * sizeof *c);
    while (huffman(c, n, len) > limit)
        for (size_t s = 0; s < n; s++)
            c[s] = c[s] ? c[s] / 2 + (c[s] & 1) : 0;
}

static uint16_t reversed(uint32_t code, unsigned bits)
{
    uint32_t r = 0;
    for (unsigned b = 0; b < bits; b++, code >>= 1)
        r = (r << 1) | (code & 1);
    return (uint16_t)r;
}

/* The canonical code of these lengths (RFC 1951, 3.2.2), bit-reversed,
 * since deflate sends a code's most significant bit first. */
static void canonical(const uint8_t *len, size_t n, uint16_t *code)
{
    uint32_t per_length[MAX_CODE_BITS + 1] = {0}, next[MAX_CODE_BITS + 1];
    for (size_t s = 0; s < n; s++)
        per_length[len[s]]++;
    per_length[0] = 0;
    uint32_t c = 0;
    for (unsigned b = 1; b <= MAX_CODE_BITS; b++) {
        c = (c + per_length[b - 1]) << 1;
        next[b] = c;
    }
    for (size_t s = 0; s < n; s++)
        code[s] = len[s] ? reversed(next[len[s]]++, len[s]) : 0;
}

/* ---- run lengths as length codes (RFC 1951, 3.2.5) ---- */

static const uint16_t length_base[29] = {3,  4,  5,  6,  7,  8,  9,  10,  11,  13,
                                         15, 17, 19, 23, 27, 31, 35, 43,  51,  59,
                                         67, 83, 99, 115, 131, 163, 195, 227, 258};
static const uint8_t length_extra[29] = {0, 0, 0, 0, 0, 0, 0, 0, 1, 1, 1, 1, 2, 2, 2,
                                         2, 3, 3, 3, 3, 4, 4, 4, 4, 5, 5, 5, 5, 0};

/* The length code (0..28, symbol 257 + it) of a run of 3..258 bytes. */
static unsigned length_code(unsigned run)
{
    unsigned k = 28;
    while (length_base[k] > run)
        k--;
    return k;
}

/* ---- the block ---- */

typedef struct block_code {
    uint8_t len[SYMBOLS];
    uint16_t code[SYMBOLS];
    size_t sent;          /* literal/length codes sent: 257 .. 286 */
    uint8_t dist_len;     /* the one distance code (distance 1): 1 bit, or 0 if unused */
    uint8_t cl_len[CL_SYMBOLS];
    uint16_t cl_code[CL_SYMBOLS];
    uint8_t run_code[MAX_RUN + 1]; /* length code of each run length */
} block_code;

/* Bytes data[i0..i1) added to four tables of counts (bytes 4k + q to
 * table q), so that a run of one byte does not wait on one counter. */
static void count_bytes(const uint8_t *data, size_t i0, size_t i1, uint32_t (*part)[256])
{
    size_t i = i0;
    for (; i + 4 <= i1; i += 4) {
        part[0][data[i]]++;
        part[1][data[i + 1]]++;
        part[2][data[i + 2]]++;
        part[3][data[i + 3]]++;
    }
    for (; i < i1; i++)
        part[0][data[i]]++;
}

/* Does a run start at i (1 <= i, i + MIN_RUN <= n): data[i], data[i + 1]
 * and data[i + 2] all equal to data[i - 1]? */
static int run_at(const uint8_t *data, size_t i)
{
    uint8_t before = data[i - 1];
    return data[i] == before && data[i + 1] == before && data[i + 2] == before;
}

/* The first i' >= i where a run starts, or n when none does. Eight bytes
 * are tested at once where the machine is little-endian: in a camera's
 * noise runs are rare, and a test per byte was a branch the processor
 * could not predict. */
static size_t next_run(const uint8_t *data, size_t n, size_t i)
{
#if defined(__BYTE_ORDER__) && __BYTE_ORDER__ == __ORDER_LITTLE_ENDIAN__
    for (; i + 8 <= n; i += 6) {
        uint64_t at, before;
        memcpy(&at, data + i, 8);
        memcpy(&before, data + i - 1, 8);
        uint64_t x = at ^ before;        /* byte k zero: data[i + k] == data[i + k - 1] */
        uint64_t t = x | x >> 8 | x >> 16; /* byte k zero: a run starts at i + k (k < 6) */
        uint64_t zero = (t - 0x0101010101010101u) & ~t & 0x0000808080808080u;
        if (zero) /* its lowest flag is exact (a borrow only runs upwards) */
            return i + (size_t)__builtin_ctzll(zero) / 8;
    }
#endif
    for (; i + MIN_RUN <= n; i++)
        if (run_at(data, i))
            return i;
    return n;
}

/* The length of the run that starts at i: copies of data[i - 1], at least
 * MIN_RUN, at most MAX_RUN and the bytes left; eight compared at once
 * where the machine is little-endian. */
static size_t run_length(const uint8_t *data, size_t n, size_t i)
{
    uint8_t before = data[i - 1];
    size_t r = MIN_RUN, most = n - i < MAX_RUN ? n - i : MAX_RUN;
#if defined(__BYTE_ORDER__) && __BYTE_ORDER__ == __ORDER_LITTLE_ENDIAN__
    uint64_t copies = 0x0101010101010101u * before;
    for (; r + 8 <= most; r += 8) {
        uint64_t v;
        memcpy(&v, data + i + r, 8);
        if (v != copies) /* the first byte that differs ends the run */
            return r + (size_t)__builtin_ctzll(v ^ copies) / 8;
    }
#endif
    while (r < most && data[i + r] == before)
        r++;
    return r;
}

/* The runs of data[0..n) (n >= 1), greedily from the start: run k starts at
 * runs[2k] and has runs[2k + 1] bytes (MIN_RUN..MAX_RUN), each a copy of
 * the byte before it. Returns the number of runs. */
static size_t find_runs(const uint8_t *data, size_t n, uint32_t *runs)
{
    size_t nr = 0;
    for (size_t i = next_run(data, n, 1); i < n; i = next_run(data, n, i)) {
        size_t r = run_length(data, n, i);
        runs[2 * nr] = (uint32_t)i;
        runs[2 * nr + 1] = (uint32_t)r;
        nr++;
        i += r;
    }
    return nr;
}

/* The codes of a block with these symbol counts. */
static void block_code_build(const uint32_t *count, int runs, block_code *bc)
{
    limited_lengths(count, SYMBOLS, MAX_CODE_BITS, bc->len);
    canonical(bc->len, SYMBOLS, bc->code);
    bc->sent = SYMBOLS;
    while (bc->sent > 257 && bc->len[bc->sent - 1] == 0)
        bc->sent--;
    bc->dist_len = runs ? 1 : 0;
    /* the code lengths are sent in the code-length code, without its
     * repeat codes: the literal/length lengths, then the distance's */
    uint32_t cl_count[CL_SYMBOLS] = {0};
    for (size_t s = 0; s < bc->sent; s++)
        cl_count[bc->len[s]]++;
    cl_count[bc->dist_len]++;
    size_t used = 0;
    for (size_t s = 0; s < CL_SYMBOLS; s++)
        used += cl_count[s] != 0;
    if (used < 2) /* the code-length code must be complete: a second, unused symbol */
        cl_count[cl_count[0] ? 1 : 0]++;
    limited_lengths(cl_count, CL_SYMBOLS, MAX_CL_BITS, bc->cl_len);
    canonical(bc->cl_len, CL_SYMBOLS, bc->cl_code);
}

/* Bits out, least significant first, four bytes at a time. */
typedef struct bit_writer {
    uint8_t *p;
    uint64_t acc;
    unsigned n; /* bits held in acc, below 32 between calls */
} bit_writer;

static void put_bits(bit_writer *b, uint32_t v, unsigned k)
{
    b->acc |= (uint64_t)v << b->n;
    b->n += k;
    if (b->n >= 32) {
        uint8_t *p = b->p;
        p[0] = (uint8_t)b->acc, p[1] = (uint8_t)(b->acc >> 8);
        p[2] = (uint8_t)(b->acc >> 16), p[3] = (uint8_t)(b->acc >> 24);
        b->p += 4;
        b->acc >>= 32;
        b->n -= 32;
    }
}

/* The bits held, padded with zeros to a whole byte. */
static void put_pad(bit_writer *b)
{
    while (b->n > 0) {
        *b->p++ = (uint8_t)b->acc;
        b->acc >>= 8;
        b->n = b->n > 8 ? b->n - 8 : 0;
    }
}

static void put_header(bit_writer *b, const block_code *bc, int final)
{
    static const uint8_t order[CL_SYMBOLS] = {16, 17, 18, 0, 8,  7, 9,  6, 10, 5,
                                              11, 4,  12, 3, 13, 2, 14, 1, 15};
    put_bits(b, final ? 1u : 0u, 1);
    put_bits(b, 2, 2);                           /* dynamic Huffman codes */
    put_bits(b, (uint32_t)(bc->sent - 257), 5); /* HLIT */
    put_bits(b, 0, 5);                           /* HDIST: one distance code */
    size_t cl_sent = CL_SYMBOLS;
    while (cl_sent > 4 && bc->cl_len[order[cl_sent - 1]] == 0)
        cl_sent--;
    put_bits(b, (uint32_t)(cl_sent - 4), 4);
    for (size_t i = 0; i < cl_sent; i++)
        put_bits(b, bc->cl_len[order[i]], 3);
    for (size_t s = 0; s < bc->sent; s++)
        put_bits(b, bc->cl_code[bc->len[s]], bc->cl_len[bc->len[s]]);
    put_bits(b, bc->cl_code[bc->dist_len], bc->cl_len[bc->dist_len]);
}

/* acc's eight bytes at p, least significant first. */
static void store64(uint8_t *p, uint64_t acc)
{
#if defined(__BYTE_ORDER__) && __BYTE_ORDER__ == __ORDER_LITTLE_ENDIAN__
    memcpy(p, &acc, 8);
#else
    for (int k = 0; k < 8; k++)
        p[k] = (uint8_t)(acc >> (8 * k));
#endif
}

/* Bytes data[i0..i1) as literals. The whole bytes held are stored every
 * three codes (at most 7 + 3 x 15 bits), without a branch on how many: a
 * test of the bits held was taken or not as the codes' lengths fell, and
 * the processor mispredicted it. The eight-byte store may run past the
 * bytes kept; later stores overwrite them. */
static void put_literals(bit_writer *b, const block_code *bc, const uint8_t *data, size_t i0,
                         size_t i1)
{
    const uint16_t *code = bc->code;
    const uint8_t *len = bc->len;
    uint8_t *p = b->p;
    uint64_t acc = b->acc;
    unsigned nb = b->n;
    store64(p, acc); /* down to fewer than 8 bits held */
    p += nb >> 3, acc >>= nb & 56, nb &= 7;
    size_t i = i0;
    for (; i + 3 <= i1; i += 3) {
        acc |= (uint64_t)code[data[i]] << nb;
        nb += len[data[i]];
        acc |= (uint64_t)code[data[i + 1]] << nb;
        nb += len[data[i + 1]];
        acc |= (uint64_t)code[data[i + 2]] << nb;
        nb += len[data[i + 2]];
        store64(p, acc);
        p += nb >> 3, acc >>= nb & 56, nb &= 7;
    }
    b->p = p, b->acc = acc, b->n = nb;
    for (; i < i1; i++)
        put_bits(b, code[data[i]], len[data[i]]);
}

/* A run of r bytes: its length code and extra bits, then distance 1. */
static void put_run(bit_writer *b, const block_code *bc, unsigned r)
{
    unsigned k = bc->run_code[r], sym = 257 + k;
    put_bits(b, bc->code[sym], bc->len[sym]);
    if (length_extra[k])
        put_bits(b, r - length_base[k], length_extra[k]);
    put_bits(b, 0, 1); /* distance code 0, the only one: distance 1 */
}

size_t lam__deflate_runs_bound(size_t n)
{
    /* a byte codes in at most 15 bits, the header in under 300 bytes, the
     * stored block in 5; and room for a 4-byte store past the end */
    return 2 * n + 512;
}

size_t lam__deflate_runs_scratch(size_t n)
{
    return (n / MIN_RUN + 1) * 2 * sizeof(uint32_t);
}

size_t lam__deflate_runs(const uint8_t *data, size_t n, int final, void *scratch, uint8_t *out)
{
    block_code bc;
    for (unsigned r = MIN_RUN; r <= MAX_RUN; r++)
        bc.run_code[r] = (uint8_t)length_code(r);
    uint32_t count[SYMBOLS] = {0}, *runs = scratch, part[4][256];
    size_t nr = find_runs(data, n, runs), at = 0;
    memset(part, 0, sizeof part);
    for (size_t k = 0; k < nr; k++) { /* the literals before each run, and the run */
        count_bytes(data, at, runs[2 * k], part);
        count[257 + bc.run_code[runs[2 * k + 1]]]++;
        at = runs[2 * k] + runs[2 * k + 1];
    }
    count_bytes(data, at, n, part);
    for (size_t v = 0; v < 256; v++)
        count[v] = part[0][v] + part[1][v] + part[2][v] + part[3][v];
    count[END_OF_BLOCK] = 1;
    block_code_build(count, nr > 0, &bc);
    bit_writer b = {out, 0, 0};
    put_header(&b, &bc, final);
    at = 0;
    for (size_t k = 0; k < nr; k++) {
        put_literals(&b, &bc, data, at, runs[2 * k]);
        put_run(&b, &bc, runs[2 * k + 1]);
        at = runs[2 * k] + runs[2 * k + 1];
    }
    put_literals(&b, &bc, data, at, n);
    put_bits(&b, bc.code[END_OF_BLOCK], bc.len[END_OF_BLOCK]);
    if (!final) { /* an empty stored block ends the block on a byte boundary */
        put_bits(&b, 0, 3);
        put_pad(&b);
        static const uint8_t empty[4] = {0x00, 0x00, 0xff, 0xff};
        memcpy(b.p, empty, 4);
        b.p += 4;
    } else {
        put_pad(&b);
    }
    return (size_t)(b.p - out);
}
