/* fuzz_main.c - the libFuzzer entry, built once per target with
 * -DFUZZ_TARGET=fuzz_<name> (make fuzz). */
#include "targets.h"
#include <gsl/gsl_errno.h>

#ifndef FUZZ_TARGET
#error "build with -DFUZZ_TARGET=fuzz_image (or another entry of targets.h)"
#endif

int LLVMFuzzerTestOneInput(const uint8_t *data, size_t n);
int LLVMFuzzerTestOneInput(const uint8_t *data, size_t n)
{
    static int init;
    if (!init) {
        gsl_set_error_handler_off();
        init = 1;
    }
    return FUZZ_TARGET(data, n);
}
