/* fuzz_image.c - libFuzzer harness (make fuzz). */
#include "targets.h"
#include <gsl/gsl_errno.h>

int LLVMFuzzerTestOneInput(const uint8_t *data, size_t n);
int LLVMFuzzerTestOneInput(const uint8_t *data, size_t n)
{
    static int init;
    if (!init) {
        gsl_set_error_handler_off();
        init = 1;
    }
    return fuzz_image(data, n);
}
