/* The rig's millisecond clock (tick_ms of the data frames), from Timer0. */
#ifndef TICK_H
#define TICK_H
#include <stdint.h>

void tick_init(void);
uint32_t tick_ms(void);

/* Called from the 1 kHz interrupt with the new tick; the heartbeat watchdog lives there so that
 * it cuts the loads even while the main loop is busy. */
void tick_hook(uint32_t now);

#endif
