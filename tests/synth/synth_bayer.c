/* synth_bayer.c - an RGGB colour-filter mosaic and our own bilinear
 * demosaic (each missing colour is the mean of its nearest same-colour
 * neighbours: 2 along a row or column, or 4 orthogonal or diagonal).
 * Edges mirror about the border pixel, which keeps the mosaic's parity. */
#include "synth_internal.h"

/* 0 red, 1 green, 2 blue at (x, y) of an RGGB mosaic. */
static int colour_at(int x, int y)
{
    return (y & 1) ? ((x & 1) ? 2 : 1) : ((x & 1) ? 1 : 0);
}

static int mirror(int i, int n)
{
    if (n == 1)
        return 0;
    if (i < 0)
        return -i;
    return i >= n ? 2 * n - 2 - i : i;
}

void synth_bayer_mosaic(const float *rgb, int w, int h, float *mosaic)
{
    for (int y = 0; y < h; y++)
        for (int x = 0; x < w; x++)
            mosaic[(size_t)y * w + x] = rgb[((size_t)y * w + x) * 3 + colour_at(x, y)];
}

/* Mean of the mosaic values of colour c among the offsets given. */
static float mean_of(const float *m, int w, int h, int x, int y, int c, const int (*d)[2],
                     int nd)
{
    float s = 0;
    int n = 0;
    for (int i = 0; i < nd; i++) {
        int xx = mirror(x + d[i][0], w), yy = mirror(y + d[i][1], h);
        if (colour_at(xx, yy) == c) {
            s += m[(size_t)yy * w + xx];
            n++;
        }
    }
    return n ? s / n : 0.0f;
}

void synth_bayer_demosaic(const float *mosaic, int w, int h, float *rgb)
{
    static const int near[8][2] = {{-1, 0}, {1, 0}, {0, -1}, {0, 1},
                                   {-1, -1}, {1, -1}, {-1, 1}, {1, 1}};
    for (int y = 0; y < h; y++)
        for (int x = 0; x < w; x++) {
            int own = colour_at(x, y);
            float *o = rgb + ((size_t)y * w + x) * 3;
            /* of the 8 neighbours, those of colour c are the 2 or 4 nearest */
            for (int c = 0; c < 3; c++)
                o[c] = c == own ? mosaic[(size_t)y * w + x]
                                : mean_of(mosaic, w, h, x, y, c, near, 8);
        }
}
