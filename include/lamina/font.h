/*
 * lamina/font.h - a small 5x7 bitmap font of our own for labels drawn into
 * PNG reports (digits, A-Z, lower case drawn as upper case, and . , - : / ( )
 * % # + = ? _ ' * < >). Text is drawn into an interleaved 8-bit RGB buffer.
 */
#ifndef LAMINA_FONT_H
#define LAMINA_FONT_H

#include <stddef.h>
#include <stdint.h>

#define LAM_FONT_W 5
#define LAM_FONT_H 7

/* Width in pixels of text at an integer scale (1 px spacing between glyphs). */
size_t lam_font_text_width(const char *text, int scale);

/* Draw text with its top-left corner at (x, y); pixels outside the buffer
 * are skipped. rgb is width*height*3 bytes. */
void lam_font_draw(uint8_t *rgb, size_t width, size_t height, long x, long y,
                   const char *text, int scale, const uint8_t colour[3]);

/* The 7 row bit patterns (bit 4 = leftmost column) of a character, or NULL
 * when the font has no glyph for it. */
const uint8_t *lam_font_glyph(char c);

#endif
