/* tests/fuzz/targets.h - one entry per fuzzed parser; shared by the
 * libFuzzer harnesses (make fuzz) and the crasher replay (make test). */
#ifndef LAMINA_FUZZ_TARGETS_H
#define LAMINA_FUZZ_TARGETS_H

#include <stddef.h>
#include <stdint.h>

int fuzz_image(const uint8_t *data, size_t n);   /* image loading: PNG, JPEG, TIFF, sniffing */
int fuzz_tiff(const uint8_t *data, size_t n);    /* the TIFF loader itself, without sniffing */
int fuzz_setup(const uint8_t *data, size_t n);   /* lamina-setup/1 JSON */
int fuzz_scene(const uint8_t *data, size_t n);   /* lamina-scene/1 JSON (parse only) */
int fuzz_csv(const uint8_t *data, size_t n);     /* n,k and spectrum CSV tables */
int fuzz_labels(const uint8_t *data, size_t n);  /* lamina-labels/1 JSON */
int fuzz_deflate(const uint8_t *data, size_t n); /* the PNG writer's deflate blocks, read back by zlib */

#endif
