/* Why the chip last reset, read before anything else can clear it. */
#ifndef RESET_CAUSE_H
#define RESET_CAUSE_H
#include <stdint.h>

/* The reset flags (MCUSR bits PORF, EXTRF, BORF, WDRF) as found at boot. */
uint8_t reset_flags(void);

#endif
